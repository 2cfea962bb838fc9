// Running Ebbline for real: the production-start checks (demo content refused), backup and restore, and the feed's lag.
export * from './preflight';
export * as backup from './backup';
export * from './feed-lag';

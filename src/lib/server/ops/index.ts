// Running Ebbline for real: the production-start checks (demo content refused) and backup and restore.
export * from './preflight';
export * as backup from './backup';

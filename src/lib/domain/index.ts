// The domain vocabulary shared by every layer: word lists, who did something, seeded randomness.
// Pure: relative imports only.
export * from './vocabulary';
export * from './actor';
export * from './random';

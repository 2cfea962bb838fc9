// Ebbline clinical core: pure functions, no I/O, relative imports only (conventions.md §1).
export * from './types';
export * from './errors';
export * from './units';
export * from './age';
export * from './body-size';
export * from './renal-function';
export * from './aki';
export * from './kinetics';
export * from './regimen';
export * from './albumin';
export * from './trace';
export * from './assess';
export * from './stored-input';

// Ebbline rules: facts, JSON Logic evaluation, default rule set, validation, diff and priority (pure).
export * from './types';
export * from './facts';
export * from './params';
export * from './evaluate';
export * from './default-rules';
export * from './validate';
export * from './diff';
export * from './priority';

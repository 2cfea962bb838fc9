// The rule sets administrators tune: drafts, publishing, back-tests and the replay of active orders.
export * from './rule-sets';
export * as ruleSets from './rule-sets';
export * from './replay';

// The prescriber directory the feed fills (practitioners, identifiers, roles).
export * from './directory';
export * as prescribers from './directory';

// The stewardship report: interventions, acceptance, time to action and findings by rule.
export * from './queries';
export * as reports from './queries';
export * from './tables';
export * from './query';

// The invented Larkspur Bay Hospital: its generator, the demo seed (staff, agents, patients) and the
// simulator that plays new results into the feed while the demo runs.
export * from './hospital';
export * from './seed';
export * from './seed-users';
export * from './seed-hospital';
export * from './simulator';
export * from './history';
export { planStays, hourlyFeed, type Stay } from './history-plan';

// Stage 2: an order re-assessed on the latest results (CrCl, drug clearance, Vd, t½ and a proposal), and the trace of how.
export * from './order';
export * from './trace';

// A patient's record as the app shows it, and what a pharmacist records on it: restarts and renal replacement.
export * from './queries';
export type { MeasuredLevelPoint, MeasuredLevelsView } from './measured-levels';
export * as patients from './queries';
export * from './order-restart';
export * from './renal-replacement';
export * as renalReplacement from './renal-replacement';

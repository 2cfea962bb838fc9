// Stage 4: recommendations composed and sent to the prescriber, answered with one click, reminded, escalated and withdrawn.
export * from './recommendations';
export * from './answer-form';
export * from './remind';
export * as loop from './remind';

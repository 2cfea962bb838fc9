// Stage 3: findings from the rules joined into one flag per order, the board's queries, the pharmacists' actions on a flag and timed snoozes.
export * from './sync';
export * from './queries';
export * as flagQueries from './queries';
export * from './actions';
export * from './wake';
export * from './board-cache';

// Stage 4: recommendations composed and sent to the prescriber, answered with one click, reminded, escalated and withdrawn.
/** The clinical core's caution, shown beside every proposed regimen (page and e-mail). */
export { PROPOSAL_CAUTION } from '../../clinical/trace';
export type { ActingUser as Who } from '../../domain/actor';
export { formatDateTime } from './emails';
export * from './compose';
// wardOf and TOKEN_SHAPE stay inside the folder (compose and answer use them)
export { findByToken, letterOf, listFor, openCountFor, previewOf, toView, type LinkPreview, type RecommendationView, type TokenLookup } from './queries';
export * as linkAccess from './link-access';
export { NO_ACCESS, type LinkAccess } from './link-access';
export * from './answer';
// answer-form (reading an answer from a posted form) is for the routes: import it from its own file, so
// the worker, which reaches this folder, does not load SvelteKit
export * from './remind';
export * as loop from './remind';

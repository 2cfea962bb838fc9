// What every request and form goes through: the input guard, form-action checks, form-error shaping, security headers and CSV responses.
export * from './input-guard';
export * from './forms';
export * from './security-headers';
export * from './csv-export';
// ./form-actions is imported by the request hook alone, as $lib/server/http/form-actions: it lists the
// routes with import.meta.glob, which exists only in the SvelteKit build, and this index is also loaded
// by the workers and scripts.

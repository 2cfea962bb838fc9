// Which bundler warnings a build prints. Warnings about the project's own files (src/, jobs/, scripts/)
// are always printed; warnings that only concern installed packages (node_modules) or a plugin's
// virtual modules are not: nobody here can act on a circular import inside a dependency, and pages of
// them hid the warnings that mattered. Read by vite.config.ts (Vite's own build, structured logs) and
// svelte.config.js (the adapter's server bundle, whose rollup call takes no log handler: see quietAdapter).
// Plain JavaScript with JSDoc types: svelte.config.js is loaded by Node without a TypeScript step.

/**
 * @typedef {{ code?: string; message?: string; id?: string; ids?: string[]; exporter?: string; loc?: { file?: string } }} BundlerLog
 * The fields of a rollup / rolldown log this module reads.
 */

/** A module id inside an installed package, or a plugin's virtual module (ids starting with NUL or `virtual:`). */
export function isThirdPartyId(/** @type {string} */ id) {
	if (id.startsWith('\0') || id.startsWith('virtual:')) return true;
	return /(^|[\\/])node_modules[\\/]/.test(id);
}

/**
 * True when every file a warning names is third-party (see isThirdPartyId). A warning that names no
 * file at all, or names one of the project's own files, is kept: when in doubt, print it.
 * @param {BundlerLog} log
 */
export function isThirdPartyWarning(log) {
	const ids = [log.id, ...(log.ids ?? []), log.exporter, log.loc?.file].filter((id) => typeof id === 'string' && id.length > 0);
	return ids.length > 0 && ids.every((id) => isThirdPartyId(/** @type {string} */ (id)));
}

/**
 * Vite's `build.rolldownOptions.onLog`: drops third-party warnings and passes everything else on.
 * @param {'info' | 'debug' | 'warn'} level
 * @param {BundlerLog} log
 * @param {(level: 'info' | 'debug' | 'warn' | 'error', log: any) => void} handler
 */
export function onBundlerLog(level, log, handler) {
	if (level === 'warn' && isThirdPartyWarning(log)) return;
	handler(level, log);
}

/**
 * Whether a line rollup printed while the adapter bundled the server (its default handler prints only
 * the message) is a third-party warning. The adapter bundles Vite's finished server output, so what it
 * could say about the project's own sources Vite's build has said already (with the files named).
 * - `Circular dependency: a -> b -> a`: third-party when every file in the cycle is (isThirdPartyId)
 * - `Generated an empty chunk: "chunks/env.js"`: a chunk of Vite's output that the adapter's
 *   one-file-per-chunk split left empty (SvelteKit's environment module when no route reads it)
 * - anything else is kept
 * @param {string} message
 */
export function isThirdPartyAdapterLine(message) {
	const circular = /^Circular dependency: (.+)$/.exec(message);
	if (circular) return isThirdPartyWarning({ code: 'CIRCULAR_DEPENDENCY', ids: circular[1].split(' -> ') });
	return /^Generated an empty chunk: ".+"\.?$/.test(message);
}

/**
 * An adapter whose build prints no third-party warnings. @sveltejs/adapter-node calls rollup with no
 * `onwarn`/`onLog` and no option to pass one, so rollup prints each warning with console.warn; while
 * the adapter runs (it runs alone, after Vite's build), console.warn drops the lines that
 * isThirdPartyAdapterLine reads as third-party and prints the rest unchanged.
 * @template {{ adapt: (builder: any) => unknown }} A
 * @param {A} adapter
 * @returns {A}
 */
export function quietAdapter(adapter) {
	return {
		...adapter,
		async adapt(builder) {
			const warn = console.warn;
			console.warn = (...args) => {
				if (args.length === 1 && typeof args[0] === 'string' && isThirdPartyAdapterLine(args[0])) return;
				warn.apply(console, args);
			};
			try {
				return await adapter.adapt(builder);
			} finally {
				console.warn = warn;
			}
		}
	};
}

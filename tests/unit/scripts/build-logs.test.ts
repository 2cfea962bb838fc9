import { describe, expect, it, vi } from 'vitest';
import { isThirdPartyAdapterLine, isThirdPartyWarning, onBundlerLog, quietAdapter } from '../../../scripts/lib/build-logs.js';

const root = '/work/ebbline';
const svelte = (file: string) => `${root}/node_modules/svelte/src/internal/client/${file}`;

describe('isThirdPartyWarning', () => {
	it('drops a circular import among files inside node_modules', () => {
		expect(isThirdPartyWarning({ code: 'CIRCULAR_DEPENDENCY', ids: [svelte('runtime.js'), svelte('reactivity/effects.js'), svelte('runtime.js')] })).toBe(true);
	});

	it('keeps a circular import that passes through the project’s own files', () => {
		for (const own of [`${root}/src/lib/server/flags/sync.ts`, `${root}/jobs/order-reassess.ts`, `${root}/scripts/lib/stack.mjs`]) {
			expect(isThirdPartyWarning({ code: 'CIRCULAR_DEPENDENCY', ids: [svelte('runtime.js'), own, svelte('runtime.js')] })).toBe(false);
		}
	});

	it('keeps a warning about one of the project’s own files, by id or by location', () => {
		expect(isThirdPartyWarning({ code: 'EVAL', id: `${root}/src/lib/server/feed/csv.ts` })).toBe(false);
		expect(isThirdPartyWarning({ code: 'EVAL', loc: { file: 'src/routes/+page.server.ts' } })).toBe(false);
		expect(isThirdPartyWarning({ code: 'MISSING_EXPORT', id: `${root}/node_modules/x/index.js`, exporter: `${root}/src/lib/format/index.ts` })).toBe(false);
	});

	it('keeps a warning that names no file (nothing says it is not ours)', () => {
		expect(isThirdPartyWarning({ code: 'PLUGIN_WARNING', message: 'some chunks are larger than 500 kB' })).toBe(false);
		expect(isThirdPartyWarning({ code: 'CIRCULAR_DEPENDENCY', ids: [] })).toBe(false);
	});

	it('drops a warning about a package or a plugin’s virtual module, also through a symlinked node_modules', () => {
		expect(isThirdPartyWarning({ code: 'EVAL', id: '../main/node_modules/@tanstack/table-core/dist/index.js' })).toBe(true);
		expect(isThirdPartyWarning({ code: 'EMPTY_BUNDLE', id: '\0virtual:__sveltekit/env' })).toBe(true);
		expect(isThirdPartyWarning({ code: 'EVAL', id: 'C:\\app\\node_modules\\pkg\\index.js' })).toBe(true);
	});

	it('does not take a folder merely named like node_modules for one', () => {
		expect(isThirdPartyWarning({ code: 'EVAL', id: `${root}/src/lib/my_node_modules/x.ts` })).toBe(false);
	});
});

describe('onBundlerLog', () => {
	it('passes the project’s warnings and every non-warning log to the handler, and nothing else', () => {
		const handler = vi.fn();
		onBundlerLog('warn', { code: 'EVAL', id: svelte('runtime.js'), message: 'eval' }, handler);
		expect(handler).not.toHaveBeenCalled();
		const own = { code: 'EVAL', id: `${root}/src/lib/server/feed/csv.ts`, message: 'eval' };
		onBundlerLog('warn', own, handler);
		const info = { code: 'X', id: svelte('runtime.js'), message: 'info' };
		onBundlerLog('info', info, handler);
		expect(handler.mock.calls).toEqual([
			['warn', own],
			['info', info]
		]);
	});
});

describe('isThirdPartyAdapterLine (the adapter’s rollup prints only the message)', () => {
	it('reads the files of a printed circular import', () => {
		expect(isThirdPartyAdapterLine(`Circular dependency: ${svelte('a.js')} -> ${svelte('b.js')} -> ${svelte('a.js')}`)).toBe(true);
		expect(isThirdPartyAdapterLine('Circular dependency: .svelte-kit/output/server/chunks/a.js -> .svelte-kit/output/server/chunks/b.js')).toBe(false);
		expect(isThirdPartyAdapterLine(`Circular dependency: ${svelte('a.js')} -> src/lib/x.ts -> ${svelte('a.js')}`)).toBe(false);
	});

	it('drops an empty chunk of the adapter’s split and keeps any other line', () => {
		expect(isThirdPartyAdapterLine('Generated an empty chunk: "chunks/env.js".')).toBe(true);
		expect(isThirdPartyAdapterLine('"x" is not exported by "src/lib/y.ts", imported by "src/routes/+page.svelte".')).toBe(false);
	});
});

describe('quietAdapter', () => {
	it('silences third-party lines only while the adapter runs, prints the rest, and restores console.warn', async () => {
		const printed: unknown[][] = [];
		const spy = vi.spyOn(console, 'warn').mockImplementation((...args: unknown[]) => void printed.push(args));
		const spied = console.warn;
		try {
			const adapter = quietAdapter({
				name: 'test',
				async adapt(_builder: unknown) {
					console.warn(`Circular dependency: ${svelte('a.js')} -> ${svelte('b.js')} -> ${svelte('a.js')}`);
					console.warn('Circular dependency: src/lib/a.ts -> src/lib/b.ts -> src/lib/a.ts');
					console.warn('two', 'arguments');
					return 'adapted';
				}
			});
			expect(await adapter.adapt({})).toBe('adapted');
			expect(adapter.name).toBe('test');
			expect(printed).toEqual([['Circular dependency: src/lib/a.ts -> src/lib/b.ts -> src/lib/a.ts'], ['two', 'arguments']]);
			expect(console.warn).toBe(spied);
		} finally {
			spy.mockRestore();
		}
	});

	it('restores console.warn when the adapter fails', async () => {
		const before = console.warn;
		const adapter = quietAdapter({
			async adapt(_builder: unknown) {
				throw new Error('adapter failed');
			}
		});
		await expect(adapter.adapt({})).rejects.toThrow('adapter failed');
		expect(console.warn).toBe(before);
	});
});

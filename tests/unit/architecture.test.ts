// The layers' import rules, read from the source: the server library never reaches back into jobs/
// (the entry passes the jobs in), and the pure core depends on nothing but itself, zod and json-logic-js:
// src/lib/clinical on itself alone; the shared vocabulary (src/lib/domain) and formatting layer
// (src/lib/format) on the clinical core and each other; src/lib/rules on those three. Every import, export-from and dynamic import() of every
// .ts file is resolved (relative paths and $lib) and checked.
import { readdirSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');
const lib = path.join(root, 'src/lib');

function tsFiles(dir: string): string[] {
	return readdirSync(dir, { withFileTypes: true }).flatMap((entry) => {
		const full = path.join(dir, entry.name);
		if (entry.isDirectory()) return tsFiles(full);
		return entry.name.endsWith('.ts') ? [full] : [];
	});
}

// `import x from '…'`, `import '…'`, `export … from '…'`, `import('…')`, over several lines
const SPECIFIER = /(?:^|[\s;])(?:import|export)\s[^'"`;]*?from\s*(['"])([^'"]+)\1|(?:^|[\s;])import\s*(['"])([^'"]+)\3|\bimport\s*\(\s*(['"])([^'"]+)\5\s*\)/g;

/** Every module `file` imports: an absolute path for relative and $lib specifiers, else the package specifier. */
function importsOf(file: string, source = readFileSync(file, 'utf8')): string[] {
	const text = source.replace(/\/\*[\s\S]*?\*\//g, '').replace(/(^|[^:])\/\/.*$/gm, '$1');
	return Array.from(text.matchAll(SPECIFIER), (m) => {
		const specifier = m[2] ?? m[4] ?? m[6];
		if (specifier.startsWith('.')) return path.resolve(path.dirname(file), specifier);
		if (specifier === '$lib' || specifier.startsWith('$lib/')) return path.join(lib, specifier.slice('$lib'.length));
		return specifier;
	});
}

const inside = (target: string, dir: string) => path.isAbsolute(target) && (target === dir || target.startsWith(dir + path.sep));

/** `file: target` for each import of a .ts file under `dir` that `allowed` refuses. */
function violations(dir: string, allowed: (target: string) => boolean): string[] {
	return tsFiles(dir).flatMap((file) =>
		importsOf(file)
			.filter((target) => !allowed(target))
			.map((target) => `${path.relative(root, file)}: ${path.isAbsolute(target) ? path.relative(root, target) : target}`)
	);
}

const jobs = path.join(root, 'jobs');
const clinical = path.join(lib, 'clinical');
const rules = path.join(lib, 'rules');
const domain = path.join(lib, 'domain');
const format = path.join(lib, 'format');
const PURE_PACKAGES = ['zod', 'json-logic-js'];

describe('reading import specifiers', () => {
	it('finds static, re-exported, side-effect and dynamic imports, and resolves relative and $lib paths', () => {
		const file = path.join(lib, 'server/queue/example.ts');
		const source = [
			"import { a } from '../../../../jobs/worker';",
			"import type {\n\tB\n} from '$lib/clinical';",
			"export * from './send';",
			"import 'zod';",
			"const c = await import('node:fs');",
			"// import { d } from 'commented-out';",
			"const text = 'not an import from here';"
		].join('\n');
		expect(importsOf(file, source)).toEqual([path.join(root, 'jobs/worker'), clinical, path.join(lib, 'server/queue/send'), 'zod', 'node:fs']);
	});
});

describe('layers', () => {
	it('src/lib/server never imports from jobs/ (the entry passes the jobs in)', () => {
		expect(violations(path.join(lib, 'server'), (target) => !inside(target, jobs))).toEqual([]);
	});

	it('the browser-safe modules (validation, feed formats, forms, flags, recommendations) never import src/lib/server', () => {
		const server = path.join(lib, 'server');
		const shared = ['validation', 'feed', 'flags', 'recommendations'].map((d) => path.join(lib, d));
		expect(shared.flatMap((dir) => violations(dir, (target) => !inside(target, server)))).toEqual([]);
		expect(importsOf(path.join(lib, 'forms.ts')).filter((target) => inside(target, server))).toEqual([]);
	});

	it('src/lib/clinical imports nothing but itself, zod and json-logic-js', () => {
		expect(violations(clinical, (target) => inside(target, clinical) || PURE_PACKAGES.includes(target))).toEqual([]);
	});

	it('src/lib/domain and src/lib/format import nothing but each other, the clinical core, zod and json-logic-js', () => {
		const pure = (target: string) => inside(target, domain) || inside(target, format) || inside(target, clinical) || PURE_PACKAGES.includes(target);
		expect([...violations(domain, pure), ...violations(format, pure)]).toEqual([]);
	});

	it('src/lib/rules imports nothing but itself, the clinical core, the vocabulary, the formatting layer, zod and json-logic-js', () => {
		const allowed = (target: string) =>
			inside(target, rules) || inside(target, clinical) || inside(target, domain) || inside(target, format) || PURE_PACKAGES.includes(target);
		expect(violations(rules, allowed)).toEqual([]);
	});
});

// A production install (`npm ci --omit=dev`, or `npm prune --omit=dev` after building) holds only the
// packages in "dependencies". The commands a hospital runs outside the built app (serve, migrate,
// create the first administrator, back up, restore, the pre-flight, a separate worker) run their
// TypeScript with tsx straight from the sources, so every package they reach, however indirectly,
// must be a production dependency; and the demo's and tests' tools (the local mailbox's SMTP server
// and parser) must not be. The built app itself (build/) bundles what it imports from devDependencies.
import { builtinModules } from 'node:module';
import { existsSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';

const root = path.resolve(import.meta.dirname, '../../..');
const pkg = JSON.parse(readFileSync(path.join(root, 'package.json'), 'utf8')) as {
	dependencies: Record<string, string>;
	devDependencies: Record<string, string>;
};

/** What a hospital runs from the sources in production (README, "Production start", "Backup and restore"). */
const PRODUCTION_ENTRIES = [
	'scripts/serve.mjs',
	'scripts/migrate.ts',
	'scripts/create-admin.ts',
	'scripts/backup.ts',
	'scripts/restore.ts',
	'scripts/preflight.ts',
	'jobs/worker.ts'
];
/** Only the demo (npm start) and the tests use these. */
const DEMO_AND_TEST_ONLY = ['smtp-server', 'mailparser'];

const SPECIFIER = /(?:^|[\s;])(?:import|export)\s+(?!type\b)(?:[^'"]*?\sfrom\s+)?['"]([^'"]+)['"]|import\(\s*['"]([^'"]+)['"]\s*\)/gm;

function resolveLocal(from: string, spec: string): string | null {
	const base = spec.startsWith('$lib/') ? path.join(root, 'src/lib', spec.slice(5)) : path.resolve(path.dirname(from), spec);
	const stem = base.replace(/\.js$/, '');
	for (const candidate of [base, `${stem}.ts`, `${stem}.js`, `${base}.mjs`, path.join(base, 'index.ts'), path.join(base, 'index.js')]) {
		if (existsSync(candidate) && !candidate.endsWith('/')) {
			try {
				readFileSync(candidate);
				return candidate;
			} catch {
				/* a folder */
			}
		}
	}
	return null;
}

/** The packages a file reaches through its static and dynamic imports, following local files. */
function packagesReachedFrom(entries: string[]): { packages: Map<string, string>; unresolved: string[] } {
	const packages = new Map<string, string>();
	const unresolved: string[] = [];
	const seen = new Set<string>();
	const queue = entries.map((e) => path.join(root, e));
	while (queue.length > 0) {
		const file = queue.pop()!;
		if (seen.has(file)) continue;
		seen.add(file);
		const text = readFileSync(file, 'utf8');
		for (const match of text.matchAll(SPECIFIER)) {
			const spec = match[1] ?? match[2];
			if (spec.startsWith('.') || spec.startsWith('$lib/')) {
				const target = resolveLocal(file, spec);
				if (target) queue.push(target);
				else unresolved.push(`${path.relative(root, file)} → ${spec}`);
				continue;
			}
			if (spec.startsWith('node:') || builtinModules.includes(spec.split('/')[0])) continue;
			const name = spec.startsWith('@') ? spec.split('/').slice(0, 2).join('/') : spec.split('/')[0];
			if (!packages.has(name)) packages.set(name, path.relative(root, file));
		}
	}
	return { packages, unresolved };
}

describe('production dependencies', () => {
	const { packages, unresolved } = packagesReachedFrom(PRODUCTION_ENTRIES);

	it('follows every local import of the production commands', () => {
		expect(unresolved).toEqual([]);
		// the walk reaches the database layer and the queue, not only the entry files
		expect([...packages.keys()]).toEqual(expect.arrayContaining(['drizzle-orm', 'postgres', 'pg-boss']));
	});

	it('every package the production commands reach is a production dependency', () => {
		const missing = [...packages].filter(([name]) => !(name in pkg.dependencies)).map(([name, file]) => `${name} (imported by ${file})`);
		expect(missing).toEqual([]);
	});

	it("keeps the demo mailbox's packages out of production dependencies", () => {
		for (const name of DEMO_AND_TEST_ONLY) {
			expect(pkg.dependencies, name).not.toHaveProperty(name);
			expect(pkg.devDependencies, name).toHaveProperty(name);
		}
	});
});

// Every migration in drizzle/meta/_journal.json states in drizzle/README.md whether it is safe while the
// app runs: a section headed by its tag, holding one verdict line in the fixed format.
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';

const drizzleFolder = new URL('../../../drizzle/', import.meta.url);
const journal = JSON.parse(readFileSync(new URL('meta/_journal.json', drizzleFolder), 'utf8')) as { entries: { tag: string }[] };
const readme = readFileSync(new URL('README.md', drizzleFolder), 'utf8');

const VERDICT = /^While the app runs: (safe|safe, but blocks .+ for .+|stop the app first \(.+\))$/;

/** The lines of each `## <heading>` section, by heading. */
function sections(markdown: string): Map<string, string[]> {
	const byHeading = new Map<string, string[]>();
	let current: string[] | null = null;
	for (const line of markdown.split('\n')) {
		const heading = /^## (.+)$/.exec(line);
		if (heading) {
			current = [];
			byHeading.set(heading[1].trim(), current);
		} else if (current) current.push(line);
	}
	return byHeading;
}

/** What is missing for each journal tag: no section, or not exactly one verdict line. */
function missingStatements(tags: string[], markdown: string): string[] {
	const bySection = sections(markdown);
	const problems: string[] = [];
	for (const tag of tags) {
		const lines = bySection.get(tag);
		if (!lines) {
			problems.push(`${tag}: no "## ${tag}" section in drizzle/README.md`);
			continue;
		}
		const verdicts = lines.filter((line) => line.startsWith('While the app runs:'));
		if (verdicts.length !== 1 || !VERDICT.test(verdicts[0])) {
			problems.push(
				`${tag}: needs exactly one line "While the app runs: safe" / "…: safe, but blocks <what> for <estimate>" / "…: stop the app first (<reason>)"; found ${verdicts.length === 0 ? 'none' : verdicts.map((v) => JSON.stringify(v)).join(', ')}`
			);
		}
	}
	return problems;
}

describe('migration statements in drizzle/README.md', () => {
	const tags = journal.entries.map((entry) => entry.tag);

	it('has a section with a verdict line for every migration in the journal', () => {
		expect(tags.length).toBeGreaterThan(0);
		expect(missingStatements(tags, readme)).toEqual([]);
	});

	it('names the migration whose section is missing', () => {
		const withoutLast = readme.replace(new RegExp(`^## ${tags.at(-1)}$`, 'm'), '## removed');
		expect(missingStatements(tags, withoutLast)).toEqual([`${tags.at(-1)}: no "## ${tags.at(-1)}" section in drizzle/README.md`]);
	});

	it('names the migration whose verdict line is missing or not in the fixed format', () => {
		const [first] = tags;
		const vague = `## ${first}\n\nCreates things.\n\nWhile the app runs: probably fine\n`;
		expect(missingStatements([first], vague)).toHaveLength(1);
		expect(missingStatements([first], vague)[0]).toMatch(new RegExp(`^${first}: needs exactly one line`));
		expect(missingStatements([first], `## ${first}\n\nCreates things.\n`)[0]).toMatch(/found none$/);
		expect(missingStatements([first], `## ${first}\n\nWhile the app runs: stop the app first (old code breaks)\n`)).toEqual([]);
	});
});

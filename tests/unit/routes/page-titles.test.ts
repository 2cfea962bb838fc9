// Page titles end up in browser history, tab lists and shared screens: no page puts a patient's name
// or MRN in its <title> (common practice for patient data in a browser).
import { readdirSync, readFileSync, statSync } from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';

function svelteFiles(dir: string): string[] {
	return readdirSync(dir).flatMap((entry) => {
		const full = path.join(dir, entry);
		return statSync(full).isDirectory() ? svelteFiles(full) : full.endsWith('.svelte') ? [full] : [];
	});
}

describe('page titles', () => {
	it('never name a patient', () => {
		const offenders: string[] = [];
		for (const file of svelteFiles('src/routes')) {
			for (const title of readFileSync(file, 'utf8').match(/<title>[\s\S]*?<\/title>/g) ?? []) {
				if (/familyName|givenName|mrn|\.patient\b|patientLabel/i.test(title)) offenders.push(`${file}: ${title}`);
			}
		}
		expect(offenders).toEqual([]);
	});
});

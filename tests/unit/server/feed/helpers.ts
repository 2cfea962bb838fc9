import { readFileSync } from 'node:fs';
import { buildAgentIndex, type LibraryAgent } from '../../../../src/lib/server/feed';

type FixtureAgent = {
	code: string;
	rxnormCode: string | null;
	name: string;
	synonyms: string[];
	usualInfusionH: number;
	combination?: { component: string; combinedPerComponent: number } | null;
};

/** The agent library from fixtures/agents.json, with made-up ids (no database in unit tests). */
export function fixtureLibrary(): LibraryAgent[] {
	const { agents } = JSON.parse(readFileSync(new URL('../../../../fixtures/agents.json', import.meta.url), 'utf8')) as { agents: FixtureAgent[] };
	return agents.map((a, i) => ({
		id: `agent-${i}`,
		code: a.code,
		rxnormCode: a.rxnormCode,
		name: a.name,
		synonyms: a.synonyms,
		active: true,
		usualInfusionH: a.usualInfusionH,
		combination: a.combination ?? null
	}));
}

export const fixtureIndex = () => buildAgentIndex(fixtureLibrary());
export const NOW = new Date('2026-12-01T12:00:00Z');

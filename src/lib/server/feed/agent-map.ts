// Maps the way an order names its drug (ATC code, RxNorm code, name or synonym) to an agent of the
// library. Matching is case-insensitive and ignores spacing and punctuation, so "Pip/Tazo",
// "pip-tazo" and "PIP TAZO" are the same name; a name two agents share is ambiguous, never guessed.

export type LibraryAgent = {
	id: string;
	code: string; // ATC
	rxnormCode: string | null;
	name: string;
	synonyms: string[];
	active: boolean;
	/** infusion time assumed for an IV order that does not state one */
	usualInfusionH: number;
	/** a combination product dosed by one component (co-trimoxazole by trimethoprim); null otherwise */
	combination?: { component: string; combinedPerComponent: number } | null;
};

export type DoseBasis = 'component' | 'combined';

/**
 * The dose in the agent's own terms, mg. For a combination product dosed by one component the basis
 * must be stated — a co-trimoxazole "960 mg" combined is 160 mg trimethoprim, a six-fold difference —
 * and is never guessed: `basisText` is the UCUM annotation ("mg{trimethoprim}") or the CSV dose_basis.
 */
export function doseInAgentTerms(agent: LibraryAgent, doseMg: number, basisText: string | null): { ok: true; doseMg: number } | { ok: false; reason: string } {
	const c = agent.combination;
	const basis = basisText?.trim().toLowerCase() || null;
	if (!c) {
		if (basis === null) return { ok: true, doseMg };
		return { ok: false, reason: `a dose basis '${basisText}' was given, but ${agent.name} is not a combination product; send plain mg` };
	}
	if (basis === null) {
		return {
			ok: false,
			reason: `${agent.name} is dosed as ${c.component}: say whether the dose is ${c.component} or the combined product (UCUM mg{${c.component}} or mg{combined}; CSV dose_basis ${c.component} or combined)`
		};
	}
	if (basis === c.component.toLowerCase()) return { ok: true, doseMg };
	if (basis === 'combined' || nameKey(basis) === nameKey(agent.name)) return { ok: true, doseMg: doseMg / c.combinedPerComponent };
	return { ok: false, reason: `dose basis '${basisText}' is not ${c.component} or combined` };
}

export const ATC_SYSTEM = 'http://www.whocc.no/atc';
export const RXNORM_SYSTEM = 'http://www.nlm.nih.gov/research/umls/rxnorm';

/** A code or name as sent: `system` is a FHIR coding system URI when known. */
export type AgentMention = { system?: string | null; code?: string | null; display?: string | null; text?: string | null };

export type AgentMatch = { ok: true; agent: LibraryAgent; matchedBy: 'atc' | 'rxnorm' | 'name' } | { ok: false; reason: string };

/** Case-, space- and punctuation-insensitive key: letters and digits only (after stripping accents). */
export function nameKey(name: string): string {
	return name
		.normalize('NFKD')
		.replace(/[\u0300-\u036f]/g, '')
		.toLowerCase()
		.replace(/[^a-z0-9]/g, '');
}

export type AgentIndex = {
	byAtc: Map<string, LibraryAgent>;
	byRxnorm: Map<string, LibraryAgent>;
	byName: Map<string, LibraryAgent | 'ambiguous'>;
	agents: LibraryAgent[];
};

export function buildAgentIndex(agents: LibraryAgent[]): AgentIndex {
	const index: AgentIndex = { byAtc: new Map(), byRxnorm: new Map(), byName: new Map(), agents };
	for (const agent of agents) {
		index.byAtc.set(agent.code.trim().toUpperCase(), agent);
		if (agent.rxnormCode) index.byRxnorm.set(agent.rxnormCode.trim(), agent);
		for (const name of [agent.name, agent.code, ...agent.synonyms]) {
			const key = nameKey(name);
			if (!key) continue;
			const seen = index.byName.get(key);
			index.byName.set(key, seen === undefined || seen === agent ? agent : 'ambiguous');
		}
	}
	return index;
}

function describeMention(mentions: AgentMention[]): string {
	const parts = mentions.flatMap((m) => {
		const out: string[] = [];
		if (m.code) out.push(m.system === ATC_SYSTEM ? `ATC ${m.code}` : m.system === RXNORM_SYSTEM ? `RxNorm ${m.code}` : `code ${m.code}`);
		if (m.display) out.push(`'${m.display}'`);
		if (m.text) out.push(`'${m.text}'`);
		return out;
	});
	return parts.length ? parts.join(', ') : 'no code or name';
}

/**
 * Finds the agent. Codes win over names; codes that point at two different agents are a conflict.
 * An inactive agent is reported as such rather than matched (the administrator disabled it).
 */
export function matchAgent(index: AgentIndex, mentions: AgentMention[]): AgentMatch {
	const found = new Map<string, { agent: LibraryAgent; by: 'atc' | 'rxnorm' | 'name' }>();
	for (const m of mentions) {
		const code = m.code?.trim();
		if (code) {
			if (m.system === ATC_SYSTEM || (!m.system && index.byAtc.has(code.toUpperCase()))) {
				const agent = index.byAtc.get(code.toUpperCase());
				if (agent) found.set(agent.id, { agent, by: 'atc' });
			} else if (m.system === RXNORM_SYSTEM || (!m.system && index.byRxnorm.has(code))) {
				const agent = index.byRxnorm.get(code);
				if (agent) found.set(agent.id, { agent, by: 'rxnorm' });
			}
		}
	}
	if (found.size === 0) {
		for (const m of mentions) {
			// a local code nobody registered may still have been added to the library as a synonym
			for (const name of [m.display, m.text, m.system === ATC_SYSTEM || m.system === RXNORM_SYSTEM ? null : m.code]) {
				if (!name) continue;
				const hit = index.byName.get(nameKey(name));
				if (hit === 'ambiguous') return { ok: false, reason: `ambiguous agent: '${name}' names more than one agent in the library` };
				if (hit) found.set(hit.id, { agent: hit, by: 'name' });
			}
		}
	}
	if (found.size === 0) return { ok: false, reason: `unknown agent: ${describeMention(mentions)} is not in the agent library` };
	if (found.size > 1) {
		const names = [...found.values()].map((f) => f.agent.name).join(' and ');
		return { ok: false, reason: `conflicting agent codes: ${describeMention(mentions)} point to ${names}` };
	}
	const [{ agent, by }] = found.values();
	if (!agent.active) return { ok: false, reason: `agent ${agent.name} (${agent.code}) is disabled in the agent library` };
	return { ok: true, agent, matchedBy: by };
}

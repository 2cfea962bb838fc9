// Agent mapping over the fixture library: codes (ATC, RxNorm), names and synonyms, case- and
// punctuation-insensitive; unknown, ambiguous, conflicting and disabled agents are reported.
import { describe, expect, it } from 'vitest';
import { ATC_SYSTEM, buildAgentIndex, matchAgent, nameKey, RXNORM_SYSTEM } from '../../../../src/lib/server/feed';
import { fixtureIndex, fixtureLibrary } from './helpers';

const index = fixtureIndex();
const name = (m: ReturnType<typeof matchAgent>) => (m.ok ? m.agent.name : m.reason);

describe('matchAgent', () => {
	it('finds an agent by ATC code (WHO ATC index) and by RxNorm code', () => {
		expect(name(matchAgent(index, [{ system: ATC_SYSTEM, code: 'j01xa01' }]))).toBe('Vancomycin');
		expect(name(matchAgent(index, [{ system: RXNORM_SYSTEM, code: '29561' }]))).toBe('Meropenem');
		// a code without a system is tried as ATC, then RxNorm
		expect(name(matchAgent(index, [{ code: '4413' }]))).toBe('Gentamicin');
	});
	it('finds an agent by name or synonym whatever the case, spacing and punctuation', () => {
		for (const text of ['PIP/TAZO', 'pip-tazo', 'Piperacillin–tazobactam', 'piperacillin tazobactam', 'TZP']) {
			expect(name(matchAgent(index, [{ text }]))).toBe('Piperacillin–tazobactam');
		}
		expect(name(matchAgent(index, [{ display: 'co-trimoxazole' }]))).toBe('Trimethoprim–sulfamethoxazole');
		expect(name(matchAgent(index, [{ text: 'Acyclovir' }]))).toBe('Aciclovir');
	});
	it('prefers codes over names', () => {
		expect(name(matchAgent(index, [{ system: ATC_SYSTEM, code: 'J01DH02', display: 'vancomycin' }]))).toBe('Meropenem');
	});
	it('reports an unknown agent with what was sent', () => {
		const m = matchAgent(index, [{ system: ATC_SYSTEM, code: 'J01ZZ99' }, { text: 'Frobnicillin' }]);
		expect(m.ok).toBe(false);
		expect(!m.ok && m.reason).toBe("unknown agent: ATC J01ZZ99, 'Frobnicillin' is not in the agent library");
	});
	it('reports codes that point at two agents, a name two agents share, and a disabled agent', () => {
		expect(
			name(
				matchAgent(index, [
					{ system: ATC_SYSTEM, code: 'J01XA01' },
					{ system: RXNORM_SYSTEM, code: '29561' }
				])
			)
		).toContain('conflicting agent codes');
		const library = fixtureLibrary();
		library[1] = { ...library[1], synonyms: [...library[1].synonyms, 'vanc'] };
		expect(name(matchAgent(buildAgentIndex(library), [{ text: 'VANC' }]))).toContain('ambiguous agent');
		library[2] = { ...library[2], active: false };
		expect(name(matchAgent(buildAgentIndex(library), [{ text: library[2].name }]))).toContain('disabled');
	});
	it('matches a local code an administrator added as a synonym', () => {
		const library = fixtureLibrary();
		library[0] = { ...library[0], synonyms: [...library[0].synonyms, 'ABX-117'] };
		expect(name(matchAgent(buildAgentIndex(library), [{ system: 'urn:larkspur-bay:pharmacy', code: 'abx 117' }]))).toBe('Vancomycin');
	});
	it('keys names by letters and digits only', () => {
		expect(nameKey('  Pip / Tazo ')).toBe('piptazo');
		expect(nameKey('Céfazoline')).toBe('cefazoline');
	});
});

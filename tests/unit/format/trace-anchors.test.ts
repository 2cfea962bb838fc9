// The trace's anchors: links point at `#trace-<key>`, and a page never uses one id twice (HTML Living
// Standard: an id is unique in its tree; WCAG 2.1 SC 4.1.1), even when a step repeats per fitted level.
import { describe, expect, it } from 'vitest';
import { traceAnchorIds } from '../../../src/lib/format';

describe('traceAnchorIds', () => {
	it("gives a key's first step the plain anchor and numbers the steps that repeat it", () => {
		const steps = [{ key: 'levelPriorClearance' }, { key: 'levelResidual' }, { key: 'levelResidual' }, { key: 'levelMapClearance' }, { key: 'levelResidual' }];
		expect(traceAnchorIds(steps)).toEqual([
			'trace-levelPriorClearance',
			'trace-levelResidual',
			'trace-levelResidual-2',
			'trace-levelMapClearance',
			'trace-levelResidual-3'
		]);
	});

	it('never repeats an id, whatever the keys', () => {
		const keys = ['a', 'b', 'a', 'a-2', 'a', 'b', 'a-2'];
		const ids = traceAnchorIds(keys.map((key) => ({ key })));
		expect(ids).toHaveLength(keys.length);
		expect(new Set(ids).size).toBe(ids.length);
		expect(ids.slice(0, 3)).toEqual(['trace-a', 'trace-b', 'trace-a-2']);
	});
});

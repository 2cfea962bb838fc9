import type { AgentParams, Assessment } from '../../clinical/types';
import type { DbOrTx } from '../db';

/** One freshly stored assessment, as the order.reassess job hands it to rule evaluation. */
export type StoredAssessment = {
	assessmentId: string;
	orderId: string;
	patientId: string;
	agent: { id: string; code: string; name: string; agentClass: string; params: AgentParams };
	order: { id: string; doseMg: number; intervalH: number; infusionH: number; route: string; startAt: Date; status: 'active' | 'stopped' };
	assessment: Assessment;
	/** time of the newest creatinine/albumin/weight/height result that fed this assessment */
	lastResultAt: Date | null;
};

/**
 * Runs the active rule set over freshly stored assessments inside the same transaction and opens,
 * refreshes or supersedes flags. Owned by the rules-and-flags work; the feed pipeline calls it.
 */
export async function evaluateAssessments(tx: DbOrTx, stored: StoredAssessment[]): Promise<void> {
	void tx;
	void stored;
}

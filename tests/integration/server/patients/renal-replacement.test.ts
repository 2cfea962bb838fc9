// Renal replacement therapy from the feed (FHIR R4 Procedure coded in SNOMED CT as dialysis) and the
// route: a patient on intermittent haemodialysis with pre/post-session creatinines is not staged as AKI
// (KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138 stages acute injury, not an established dialysis
// programme) and gets the agent's dialysis regimen; oral vancomycin (not absorbed; product information)
// raises no renal flag. The same patient without the dialysis record is the control that shows the
// checks can fail.
import { sql } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { seedDefaultVersion } from '../../../../src/lib/server/rules';
import { recordRestart, renalReplacement } from '../../../../src/lib/server/patients';
import { actions } from '../../../../src/routes/patients/[id]/+page.server';
import { dialysisBundle, oralBundle } from '../../../fixtures/dialysis-feed';
import { makeUser } from '../rules/fixture';
import { drainReassess, event, ingestText, queuedOrderIds, withAgents } from '../feed/helpers';

const rows = async <T>(q: ReturnType<typeof sql>) => Array.from((await getDb().execute(q)) as unknown as Iterable<T>);

async function orderBySource(sourceId: string) {
	const [o] = await rows<{ id: string; patient_id: string }>(sql`select id, patient_id from orders where source_id = ${sourceId}`);
	return o;
}
async function latestAssessment(orderId: string) {
	const [a] = await rows<{
		result: {
			renal: { kdigoStage: number; renalReplacement: string | null; kineticGfrMlMin: number | null };
			dosing: { referenceLabel: string | null; proposed: { doseMg: number; intervalH: number } | null; proposalReason: string | null; cautions: string[] };
			therapy: { systemic: boolean };
		};
	}>(sql`select result from assessments where order_id = ${orderId}::uuid order by at desc, created_at desc limit 1`);
	return a.result;
}
async function openRuleKeys(orderId: string) {
	return (
		await rows<{ rule_key: string }>(sql`
			select ff.rule_key from flags f join flag_findings ff on ff.flag_id = f.id
			where f.order_id = ${orderId}::uuid and f.state <> 'closed' and ff.resolved_at is null order by ff.rule_key`)
	).map((r) => r.rule_key);
}

beforeAll(async () => {
	await withAgents();
	await seedDefaultVersion();
});

describe('intermittent haemodialysis from dialysis Procedures', () => {
	const now = Date.now();

	it('stores the sessions, stages no AKI, computes no kinetic GFR and holds the order against the dialysis regimen', async () => {
		const result = await ingestText(dialysisBundle('rrt1', now));
		expect(result.counts.quarantined).toBe(0);
		expect(result.entries.filter((e) => e.resourceType === 'Procedure').map((e) => e.outcome)).toEqual(['accepted', 'accepted', 'accepted']);
		await drainReassess();
		const order = await orderBySource('rrt1-hd-rx');
		const a = await latestAssessment(order.id);
		expect(a.renal.renalReplacement).toBe('ihd');
		expect(a.renal.kdigoStage).toBe(0);
		expect(a.renal.kineticGfrMlMin).toBeNull();
		// meropenem on intermittent haemodialysis: 500 mg q24h (agent library, example data from memory)
		expect(a.dosing.referenceLabel).toBe('intermittent haemodialysis');
		expect(a.dosing.proposed).toMatchObject({ doseMg: 500, intervalH: 24 });
		expect(a.dosing.cautions.join(' ')).toContain('intermittent haemodialysis');
		const keys = await openRuleKeys(order.id);
		expect(keys).not.toContain('aki');
		expect(keys).not.toContain('creatinine-unstable');
		// 1 g q8h against 500 mg q24h is six times the dialysis regimen
		expect(keys).toContain('dose-above-band');
	});

	it('control: the same creatinines without a dialysis record are staged as AKI and unstable', async () => {
		await ingestText(dialysisBundle('rrt2', now, { withProcedures: false }));
		await drainReassess();
		const order = await orderBySource('rrt2-hd-rx');
		const a = await latestAssessment(order.id);
		expect(a.renal.renalReplacement).toBeNull();
		expect(a.renal.kdigoStage).toBeGreaterThan(0);
		const keys = await openRuleKeys(order.id);
		expect(keys).toContain('aki');
		expect(keys).toContain('creatinine-unstable');
	});

	it('is idempotent: the same sessions in another message are duplicates; entered-in-error withdraws one', async () => {
		const again = JSON.parse(dialysisBundle('rrt1', now));
		again.entry = again.entry.filter((e: { resource: { resourceType: string } }) => e.resource.resourceType === 'Procedure');
		const second = await ingestText(JSON.stringify(again));
		expect(second.entries.map((e) => e.outcome)).toEqual(['duplicate', 'duplicate', 'duplicate']);
		const order = await orderBySource('rrt1-hd-rx');
		const [{ n }] = await rows<{ n: number }>(sql`select count(*)::int as n from renal_replacement_events where patient_id = ${order.patient_id}::uuid`);
		expect(n).toBe(3);
		const withdraw = { ...again, entry: [{ resource: { ...again.entry[0].resource, status: 'entered-in-error' } }] };
		const third = await ingestText(JSON.stringify(withdraw));
		expect(third.entries[0]).toMatchObject({ outcome: 'accepted', detail: 'retracted' });
		const [{ n: after }] = await rows<{ n: number }>(sql`select count(*)::int as n from renal_replacement_events where patient_id = ${order.patient_id}::uuid`);
		expect(after).toBe(2);
	});

	it('quarantines a Procedure that is not dialysis, naming the field and the codes it reads', async () => {
		const bundle = {
			resourceType: 'Bundle',
			type: 'batch',
			entry: [
				{
					resource: {
						resourceType: 'Procedure',
						id: 'rrt-appendix',
						status: 'completed',
						code: { coding: [{ system: 'http://snomed.info/sct', code: '80146002', display: 'Appendectomy' }] },
						subject: { reference: 'Patient/rrt1-hd' },
						performedDateTime: new Date(now - 3_600_000).toISOString()
					}
				}
			]
		};
		const result = await ingestText(JSON.stringify(bundle));
		expect(result.entries[0]).toMatchObject({ outcome: 'quarantined', field: 'code.coding' });
		expect(result.entries[0].reason).toContain('302497006');
	});
});

describe('route', () => {
	it('oral vancomycin in AKI: no systemic assessment, no renal flag, no proposal', async () => {
		await ingestText(oralBundle('rrt3', Date.now()));
		await drainReassess();
		const order = await orderBySource('rrt3-po-vanc');
		const a = await latestAssessment(order.id);
		expect(a.therapy.systemic).toBe(false);
		expect(a.dosing.proposed).toBeNull();
		expect(a.renal.kdigoStage).toBeGreaterThan(0);
		expect(await openRuleKeys(order.id)).toEqual([]);
	});
});

describe('a pharmacist sets or clears the status on the patient page', () => {
	it('set: audited, queues the active orders, and the next assessment doses on the dialysis regimen; clear undoes it', async () => {
		await ingestText(dialysisBundle('rrt4', Date.now(), { withProcedures: false }));
		await drainReassess();
		const order = await orderBySource('rrt4-hd-rx');
		const pharmacist = await makeUser('pharmacist');
		const since = new Date(Date.now() - 10 * 24 * 3_600_000).toISOString().slice(0, 16);
		const set = await renalReplacement.setStatus(order.patient_id, { mode: 'ihd', sinceLocal: since, reason: 'on the renal unit programme' }, pharmacist, {
			timeZone: 'UTC'
		});
		expect(set.ordersQueued).toBe(1);
		expect(await queuedOrderIds()).toContain(order.id);
		const [audit] = await rows<{ actor_id: string; after: { mode: string } }>(
			sql`select actor_id, after from audit_log where action = 'patient.renal_replacement_set' and object_id = ${order.patient_id}`
		);
		expect(audit).toMatchObject({ actor_id: pharmacist.actorId, after: { mode: 'ihd' } });
		await drainReassess();
		expect((await latestAssessment(order.id)).renal.renalReplacement).toBe('ihd');
		expect(await openRuleKeys(order.id)).not.toContain('aki');
		expect((await renalReplacement.statusOf(order.patient_id)).current).toMatchObject({ mode: 'ihd' });

		await renalReplacement.clearStatus(order.patient_id, { reason: 'recovered, off dialysis' }, pharmacist);
		await drainReassess();
		expect((await latestAssessment(order.id)).renal.renalReplacement).toBeNull();
		expect((await renalReplacement.statusOf(order.patient_id)).current).toBeNull();
		const [cleared] = await rows<{ n: number }>(
			sql`select count(*)::int as n from audit_log where action = 'patient.renal_replacement_cleared' and object_id = ${order.patient_id}`
		);
		expect(cleared.n).toBe(1);
	});

	it('the form action refuses a physician (403) and names the field at fault for a pharmacist', async () => {
		const order = await orderBySource('rrt4-hd-rx');
		const form = (values: Record<string, string>) => {
			const body = new URLSearchParams(values);
			return new Request(`http://127.0.0.1/patients/${order.patient_id}?/renalReplacementSet`, {
				method: 'POST',
				body,
				headers: { 'content-type': 'application/x-www-form-urlencoded' }
			});
		};
		const physician = await makeUser('physician');
		const pharmacist = await makeUser('pharmacist');
		const user = (u: { actorId: string | null; actorLabel: string }, role: string) => ({
			user: { id: u.actorId, email: u.actorLabel, displayName: u.actorLabel, role }
		});
		await expect(
			actions.renalReplacementSet(
				event(form({ mode: 'ihd', since: '2026-11-20T08:00', reason: 'x y z' }), user(physician, 'physician') as never, { id: order.patient_id })
			)
		).rejects.toMatchObject({ status: 403 });
		const bad = (await actions.renalReplacementSet(
			event(form({ mode: 'hemofiltration', since: '2026-11-20T08:00', reason: 'ok reason' }), user(pharmacist, 'pharmacist') as never, { id: order.patient_id })
		)) as { status: number; data: { errors: Record<string, string> } };
		expect(bad.status).toBe(400);
		expect(bad.data.errors.mode).toContain('Choose');
		const noReason = (await actions.renalReplacementSet(
			event(form({ mode: 'pd', since: '2026-11-20T08:00', reason: '' }), user(pharmacist, 'pharmacist') as never, { id: order.patient_id })
		)) as { status: number; data: { errors: Record<string, string> } };
		expect(noReason.data.errors.reason).toContain('reason');
	});
});

describe('a documented restart (Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864: a loading dose starts therapy)', () => {
	it('a running vancomycin order gets no loading dose until a pharmacist records a restart; then one, within 20–35 mg/kg', async () => {
		const now = Date.now();
		const iso = (hAgo: number) => new Date(now - hAgo * 3_600_000).toISOString();
		const subject = { reference: 'Patient/rst-p' };
		const obs = (id: string, code: string, hAgo: number, value: number, unit: string) => ({
			resource: {
				resourceType: 'Observation',
				id,
				status: 'final',
				code: { coding: [{ system: 'http://loinc.org', code }] },
				subject,
				effectiveDateTime: iso(hAgo),
				valueQuantity: { value, unit, code: unit }
			}
		});
		const bundle = {
			resourceType: 'Bundle',
			type: 'batch',
			entry: [
				{
					resource: {
						resourceType: 'Patient',
						id: 'rst-p',
						identifier: [{ value: 'RST0001' }],
						name: [{ family: 'Restart', given: ['Tamsin'] }],
						gender: 'male',
						birthDate: '1966-05-05'
					}
				},
				obs('rst-h', '8302-2', 90, 178, 'cm'),
				obs('rst-w', '29463-7', 90, 70, 'kg'),
				obs('rst-c1', '2160-0', 60, 1.0, 'mg/dL'),
				obs('rst-c2', '2160-0', 6, 1.0, 'mg/dL'),
				obs('rst-a', '1751-7', 6, 38, 'g/L'),
				{
					resource: {
						resourceType: 'MedicationRequest',
						id: 'rst-rx',
						status: 'active',
						medicationCodeableConcept: { coding: [{ system: 'http://www.whocc.no/atc', code: 'J01XA01' }] },
						subject,
						authoredOn: iso(72),
						dosageInstruction: [
							{
								route: { text: 'iv' },
								timing: { repeat: { period: 12, periodUnit: 'h', duration: 1.5, durationUnit: 'h' } },
								doseAndRate: [{ doseQuantity: { value: 750, unit: 'mg' } }]
							}
						]
					}
				}
			]
		};
		await ingestText(JSON.stringify(bundle));
		await drainReassess();
		const order = await orderBySource('rst-rx');
		type WithLoading = { proposed: { loadingDoseMg: number | null } | null };
		const before = (await latestAssessment(order.id)).dosing as unknown as WithLoading;
		expect(before.proposed).not.toBeNull();
		expect(before.proposed!.loadingDoseMg).toBeNull();
		const pharmacist = await makeUser('pharmacist');
		expect(await recordRestart(order.patient_id, order.id, pharmacist)).toBe(true);
		await drainReassess();
		const after = (await latestAssessment(order.id)).dosing as unknown as WithLoading;
		// 70 kg: Vd 49 L × 25 mg/L = 1,225 mg, raised to 20 mg/kg = 1,400 mg → 1,500 mg (250-mg step), ≤ 35 mg/kg
		expect(after.proposed!.loadingDoseMg).toBe(1500);
		const [audit] = await rows<{ n: number }>(
			sql`select count(*)::int as n from audit_log where action = 'order.restart_recorded' and object_id = ${order.id}`
		);
		expect(audit.n).toBe(1);
		// another patient's order is refused
		expect(await recordRestart('00000000-0000-0000-0000-000000000000', order.id, pharmacist)).toBe(false);
	});
});

import { describe, expect, it } from 'vitest';
import { accessFor, isAllowed } from '../../../src/lib/server/auth/access';
import { escapeHtml, renderEmail, redactLinks } from '../../../src/lib/server/mail';
import { navFor } from '../../../src/lib/navigation';
import { formatProposed, formatRegimen } from '../../../src/lib/format';
import { initials, keyNumberRows, patientLabel, type KeyNumbers } from '../../../src/lib/recommendations/format';
import { composeSchema, declineSchema, modifySchema } from '../../../src/lib/validation/recommendations';
import { settingsFormSchema } from '../../../src/lib/validation/settings';

const locals = (role: 'pharmacist' | 'physician' | 'admin' | null) =>
	({ requestId: 'r', user: role && { id: 'u', email: 'e', displayName: 'd', role }, sessionId: null, feedToken: null, denied: false }) as App.Locals;

describe('patient detail in e-mails', () => {
	const p = { givenName: 'Marisol', familyName: 'Quenby', mrn: 'LB-001', ward: 'Renal Unit' };
	it('is initials, MRN and ward by default, never the name', () => {
		expect(patientLabel(p, 'initials_mrn_ward')).toBe('M.Q. · MRN LB-001 · Renal Unit');
		expect(patientLabel(p, 'initials_mrn_ward')).not.toContain('Quenby');
	});
	it('names the patient only when the setting allows it', () => {
		expect(patientLabel(p, 'full_name')).toBe('Marisol Quenby · MRN LB-001 · Renal Unit');
	});
	it('copes with a missing ward and odd spacing', () => {
		expect(initials(' ada ', 'lovelace')).toBe('A.L.');
		expect(patientLabel({ ...p, ward: null }, 'initials_mrn_ward')).toBe('M.Q. · MRN LB-001 · ward not recorded');
	});
});

describe('regimens and key numbers', () => {
	it('print units beside every value', () => {
		expect(formatRegimen({ doseMg: 1000, intervalH: 8, infusionH: 0.5, route: 'iv' })).toBe('1,000 mg IV every 8 h, infused over 0.5 h');
		expect(formatProposed({ doseMg: 1250, intervalH: 24, infusionH: 2, loadingDoseMg: 1750 })).toBe(
			'1,250 mg every 24 h, infused over 2 h; consider a loading dose of 1,750 mg as the first dose only'
		);
		expect(formatRegimen({ doseMg: 500, intervalH: 12, infusionH: 0, route: 'po' })).toBe('500 mg oral every 12 h');
	});
	it('show then → now, the AUC with its target and the trough with its limit, and a dash for unknowns', () => {
		const k: KeyNumbers = {
			assessedAt: '',
			crclThenMlMin: 88.4,
			crclNowMlMin: 31.6,
			albuminGL: null,
			halfLifeThenH: 6.04,
			halfLifeNowH: 14.96,
			troughMgL: 17.26,
			auc24MgHL: 702.4,
			troughMaxMgL: 20,
			aucTargetMgHL: [400, 600]
		};
		const rows = Object.fromEntries(keyNumberRows(k).map((r) => [r.label, r.value]));
		expect(rows['Creatinine clearance (Cockcroft–Gault), order start → now']).toBe('88 → 32 mL/min');
		expect(rows['Serum albumin, latest']).toBe('—');
		expect(rows['Expected half-life, order start → now']).toBe('6 → 15 h');
		expect(rows['Predicted AUC24 of the current regimen']).toBe('702 mg·h/L (target 400–600 mg·h/L)');
		expect(rows['Predicted trough of the current regimen']).toBe('17.3 mg/L (limit 20 mg/L)');
	});
	it('show the AUC only for agents dosed to an AUC target', () => {
		const k: KeyNumbers = {
			assessedAt: '',
			crclThenMlMin: 47,
			crclNowMlMin: 18,
			albuminGL: 26,
			halfLifeThenH: 1.6,
			halfLifeNowH: 2.4,
			troughMgL: 7.01,
			auc24MgHL: 632,
			troughMaxMgL: null,
			aucTargetMgHL: null
		};
		const labels = keyNumberRows(k).map((r) => r.label);
		expect(labels).not.toContain('Predicted AUC24 of the current regimen');
		expect(keyNumberRows(k).at(-1)).toEqual({ label: 'Predicted trough of the current regimen', value: '7 mg/L' });
	});
});

describe('e-mail layout', () => {
	it('escapes what people typed', () => {
		expect(escapeHtml(`<script>alert("x")</script>&'`)).toBe('&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt;&amp;&#39;');
		const { html, text } = renderEmail({ title: 'T', preheader: 'p', footer: 'f', blocks: [{ kind: 'quote', by: 'Ph', text: '<b>dose</b>\nline 2' }] });
		expect(html).toContain('&lt;b&gt;dose&lt;/b&gt;<br>line 2');
		expect(html).not.toContain('<b>dose</b>');
		expect(text).toContain('> <b>dose</b>\n> line 2');
	});
	it('removes answer links from the stored copy after delivery', () => {
		const token = 'A'.repeat(43);
		expect(redactLinks(`Open http://x/respond/${token} now`)).toBe('Open http://x/respond/[link removed after delivery] now');
	});
});

describe('forms', () => {
	const base = {
		doseMg: '500',
		intervalH: '12',
		infusionH: '0.5',
		loadingDoseMg: '',
		physicianId: '7f1c1f9e-3a47-4bd5-9f39-0c6a5d1e2b11',
		message: 'Please reduce the dose.',
		version: '2'
	};
	it('name the field at fault, with its unit', () => {
		const r = composeSchema.safeParse({ ...base, doseMg: 'abc', loadingDoseMg: '-5', physicianId: 'nobody' });
		expect(r.success).toBe(false);
		const issues = Object.fromEntries(r.error!.issues.map((i) => [i.path.join('.'), i.message]));
		expect(issues.doseMg).toBe('The dose must be a number in mg.');
		expect(issues.loadingDoseMg).toBe('The loading dose must be above 0 and at most 20000 mg.');
		expect(issues.physicianId).toBe('Choose the physician who receives the recommendation.');
	});
	it('refuse an infusion longer than the interval', () => {
		const r = modifySchema.safeParse({ doseMg: '500', intervalH: '8', infusionH: '9', loadingDoseMg: '' });
		expect(r.error?.issues[0]).toMatchObject({ path: ['infusionH'] });
	});
	it('require a reason to decline', () => {
		expect(declineSchema.safeParse({ reason: '  ' }).success).toBe(false);
		expect(declineSchema.safeParse({ reason: 'levels pending' }).success).toBe(true);
	});
	it('accept a five-field cron for the digest and refuse anything else', () => {
		const ok = { emailPatientDetail: 'initials_mrn_ward', reminderAfterH: '24', tokenLifetimeH: '72', emailRetentionDays: '30' };
		expect(settingsFormSchema.safeParse({ ...ok, digestCron: '0 7 * * *' }).success).toBe(true);
		expect(settingsFormSchema.safeParse({ ...ok, digestCron: '*/15 6-8 * * 1-5' }).success).toBe(true);
		expect(settingsFormSchema.safeParse({ ...ok, digestCron: '0 7 * *' }).success).toBe(false);
		expect(settingsFormSchema.safeParse({ ...ok, digestCron: '7am' }).success).toBe(false);
		expect(settingsFormSchema.safeParse({ ...ok, reminderAfterH: '0', digestCron: '0 7 * * *' }).success).toBe(false);
		expect(settingsFormSchema.safeParse({ ...ok, emailRetentionDays: '0', digestCron: '0 7 * * *' }).success).toBe(false);
		expect(settingsFormSchema.safeParse({ ...ok, emailRetentionDays: '7.5', digestCron: '0 7 * * *' }).success).toBe(false);
	});
});

describe('access', () => {
	it('opens the answer link to anyone, and the other recommendation pages by role', () => {
		expect(isAllowed(accessFor('/respond/[token]'), locals(null))).toBe(true);
		expect(isAllowed(accessFor('/flags/[id]/recommend'), locals('pharmacist'))).toBe(true);
		expect(isAllowed(accessFor('/flags/[id]/recommend'), locals('physician'))).toBe(false);
		expect(isAllowed(accessFor('/recommendations'), locals('physician'))).toBe(true);
		expect(isAllowed(accessFor('/recommendations'), locals('admin'))).toBe(true);
		expect(isAllowed(accessFor('/recommendations'), locals('pharmacist'))).toBe(false);
		for (const route of ['/admin/settings', '/dev/mail']) {
			expect(isAllowed(accessFor(route), locals('admin'))).toBe(true);
			expect(isAllowed(accessFor(route), locals('pharmacist'))).toBe(false);
			expect(isAllowed(accessFor(route), locals(null))).toBe(false);
		}
		expect(isAllowed(accessFor('/notifications'), locals('physician'))).toBe(true);
		expect(isAllowed(accessFor('/notifications'), locals(null))).toBe(false);
	});
	it('lists My recommendations for physicians and the mailbox and settings for administrators', () => {
		expect(navFor('physician').map((n) => n.href)).toContain('/recommendations');
		expect(navFor('pharmacist').map((n) => n.href)).not.toContain('/dev/mail');
		expect(navFor('admin').map((n) => n.href)).toContain('/admin/settings');
		// the test mailbox only with the development flag
		expect(navFor('admin').map((n) => n.href)).not.toContain('/dev/mail');
		expect(navFor('admin', { devMailbox: true }).map((n) => n.href)).toContain('/dev/mail');
		expect(navFor('pharmacist', { devMailbox: true }).map((n) => n.href)).not.toContain('/dev/mail');
	});
});

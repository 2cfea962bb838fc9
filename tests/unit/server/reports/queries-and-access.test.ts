import { describe, expect, it } from 'vitest';
import { isAllowed, routeAccess } from '../../../../src/lib/server/auth/access';
import { lastDays, parseReportQuery, reportQueryString, daysBetween } from '../../../../src/lib/server/reports';
import { navFor } from '../../../../src/lib/navigation';
import { auditQuerySchema } from '../../../../src/lib/validation/audit';

const locals = (role: App.SessionUser['role'] | null) =>
	({
		requestId: 't',
		sessionId: null,
		user: role ? { id: 'u', email: `${role}@larkspur.test`, displayName: role, role } : null,
		feedToken: null
	}) as unknown as App.Locals;

describe('report filters from the URL', () => {
	const now = new Date('2026-03-29T23:30:00Z'); // 00:30 on 30 March in London (summer time began that morning)

	it('defaults to the last 30 days ending today in the hospital zone', () => {
		expect(lastDays('Europe/London', 30, now)).toEqual({ from: '2026-03-01', to: '2026-03-30' });
		expect(lastDays('America/New_York', 30, now)).toEqual({ from: '2026-02-28', to: '2026-03-29' });
		const parsed = parseReportQuery(new URLSearchParams(''), 'Europe/London', now);
		expect(parsed).toEqual({ ok: true, filter: { from: '2026-03-01', to: '2026-03-30', wards: [] } });
	});

	it('reads several wards and writes them back', () => {
		const parsed = parseReportQuery(new URLSearchParams('from=2026-01-01&to=2026-01-31&ward=ICU&ward=3+North+Medicine&ward='), 'Europe/London');
		expect(parsed).toEqual({ ok: true, filter: { from: '2026-01-01', to: '2026-01-31', wards: ['ICU', '3 North Medicine'] } });
		if (parsed.ok) expect(reportQueryString(parsed.filter)).toBe('from=2026-01-01&to=2026-01-31&ward=ICU&ward=3+North+Medicine');
	});

	it('names the field at fault for an impossible date, a reversed range or a range over a year', () => {
		const errors = (q: string) => {
			const parsed = parseReportQuery(new URLSearchParams(q), 'Europe/London');
			return parsed.ok ? {} : parsed.errors;
		};
		expect(errors('from=2026-02-30&to=2026-03-01')).toEqual({ from: 'That date does not exist.' });
		expect(errors('from=2026-02-10&to=2026-02-01')).toEqual({ to: 'The end date must be on or after the start date.' });
		expect(errors('from=2025-01-01&to=2026-01-02')).toEqual({ from: 'Choose a range of at most 366 days.' });
		expect(errors('from=2024-01-01&to=2024-12-31')).toEqual({}); // a leap year: 366 days
	});

	it('lists every day of a range, across a month end and a clock change', () => {
		expect(daysBetween('2026-03-28', '2026-04-01')).toEqual(['2026-03-28', '2026-03-29', '2026-03-30', '2026-03-31', '2026-04-01']);
	});
});

describe('audit filters', () => {
	it('treats empty fields as no filter and reads cursors as numbers', () => {
		expect(auditQuerySchema.parse({ actor: '', action: 'flag.claimed', before: '120' })).toEqual({ action: 'flag.claimed', before: 120 });
	});
	it('refuses a malformed time and a reversed range', () => {
		expect(auditQuerySchema.safeParse({ from: 'yesterday' }).success).toBe(false);
		expect(auditQuerySchema.safeParse({ from: '2026-01-06T10:00', to: '2026-01-05T10:00' }).success).toBe(false);
		expect(auditQuerySchema.safeParse({ before: '-3' }).success).toBe(false);
	});
});

describe('access to the report and the audit log', () => {
	it('opens the report and its exports to pharmacists and administrators only', () => {
		for (const route of ['/reports', '/reports/export/[table]']) {
			expect(isAllowed(routeAccess[route], locals('pharmacist'))).toBe(true);
			expect(isAllowed(routeAccess[route], locals('admin'))).toBe(true);
			expect(isAllowed(routeAccess[route], locals('physician'))).toBe(false);
			expect(isAllowed(routeAccess[route], locals(null))).toBe(false);
		}
	});
	it('opens the audit log and its export to administrators only', () => {
		for (const route of ['/admin/audit', '/admin/audit/export']) {
			expect(isAllowed(routeAccess[route], locals('admin'))).toBe(true);
			expect(isAllowed(routeAccess[route], locals('pharmacist'))).toBe(false);
			expect(isAllowed(routeAccess[route], locals('physician'))).toBe(false);
		}
	});
	it('puts Reports in the pharmacist’s and administrator’s navigation and Audit log in the administrator’s', () => {
		expect(navFor('pharmacist').map((i) => i.label)).toContain('Reports');
		expect(navFor('pharmacist').map((i) => i.label)).not.toContain('Audit log');
		expect(navFor('admin').map((i) => i.label)).toEqual(expect.arrayContaining(['Reports', 'Audit log']));
		expect(navFor('physician').map((i) => i.label)).not.toContain('Reports');
	});
});

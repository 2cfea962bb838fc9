// The pharmacists' morning digest: what is on the board, what is new since yesterday, and the flags
// that have waited longest, e-mailed to each active pharmacist once per day.
import { SEVERITIES, severityLabel } from '../../domain/vocabulary';
import { and, asc, count, eq, gt, ne, sql, type SQL } from 'drizzle-orm';
import { dayIn, withUnit } from '../../format';
import { patientLabel } from '../../recommendations/format';
import * as audit from '../audit';
import { config } from '../config';
import { getDb, type DbOrTx } from '../db';
import { agents, encounters, flags, orders, outboundEmails, patients, users, type Severity } from '../db/schema';
import { renderEmail, type EmailBlock, countOpen as undeliverableCount } from '../mail';
import * as mail from '../mail';
import { escalatedOpen } from '../recommendations';
import * as settings from '../settings';

/**
 * Flags a pharmacist sees on the board: not closed, and not asleep (snoozed until the next result, or
 * until a time still ahead); the board's "open" filter uses the same definition.
 */
export function onBoard(now: Date): SQL {
	return sql`(${flags.state} <> 'closed' and not (${flags.state} = 'snoozed' and (${flags.snoozeUntilNextResult} or ${flags.snoozedUntil} > ${now.toISOString()}::timestamptz)))`;
}
const DAY_MS = 86_400_000;

export type DigestSnapshot = {
	at: Date;
	bySeverity: Record<Severity, number>;
	openTotal: number;
	awaitingPhysician: number;
	newSinceYesterday: number;
	oldest: {
		flagId: string;
		severity: Severity;
		finding: string;
		agentName: string;
		openedAt: Date;
		patient: { givenName: string; familyName: string; mrn: string; ward: string | null };
	}[];
	/** recommendations still unanswered after the reminders (or after their link expired), oldest first */
	escalated?: {
		id: string;
		flagId: string;
		agentName: string;
		to: string;
		pharmacistName: string;
		sentAt: Date;
		patient: { givenName: string; familyName: string; mrn: string; ward: string | null };
	}[];
	/** e-mails that could not be delivered and still need an administrator */
	undeliverable?: number;
};

export async function snapshot(db: DbOrTx = getDb(), now = new Date(), oldestLimit = 5): Promise<DigestSnapshot> {
	const since = new Date(now.getTime() - DAY_MS);
	const [severityRows, [awaiting], [fresh], oldest, escalated, undeliverable] = await Promise.all([
		db.select({ severity: flags.severity, n: count() }).from(flags).where(onBoard(now)).groupBy(flags.severity),
		db.select({ n: count() }).from(flags).where(eq(flags.state, 'recommended')),
		db
			.select({ n: count() })
			.from(flags)
			.where(and(onBoard(now), gt(flags.openedAt, since))),
		db
			.select({
				flagId: flags.id,
				severity: flags.severity,
				finding: flags.finding,
				agentName: agents.name,
				openedAt: flags.openedAt,
				patient: { givenName: patients.givenName, familyName: patients.familyName, mrn: patients.mrn },
				ward: sql<string | null>`coalesce(
					(select e.ward from ${encounters} e where e.id = ${orders.encounterId}),
					(select e.ward from ${encounters} e where e.patient_id = ${patients.id} order by (e.discharged_at is not null), e.admitted_at desc limit 1))`
			})
			.from(flags)
			.innerJoin(orders, eq(orders.id, flags.orderId))
			.innerJoin(agents, eq(agents.id, orders.agentId))
			.innerJoin(patients, eq(patients.id, flags.patientId))
			.where(and(onBoard(now), ne(flags.state, 'recommended')))
			.orderBy(asc(flags.openedAt), asc(flags.id))
			.limit(oldestLimit),
		escalatedOpen(db),
		undeliverableCount(db)
	]);
	const bySeverity = { high: 0, moderate: 0, low: 0 } as Record<Severity, number>;
	for (const row of severityRows) bySeverity[row.severity] = row.n;
	return {
		at: now,
		bySeverity,
		openTotal: SEVERITIES.reduce((sum, s) => sum + bySeverity[s], 0),
		awaitingPhysician: awaiting?.n ?? 0,
		newSinceYesterday: fresh?.n ?? 0,
		oldest: oldest.map(({ ward, patient, ...rest }) => ({ ...rest, patient: { ...patient, ward } })),
		escalated: escalated.map(({ ward, patient, escalatedAt: _escalatedAt, ...rest }) => ({
			...rest,
			agentName: rest.agentName ?? 'an agent',
			patient: { ...patient, ward }
		})),
		undeliverable
	};
}

function age(openedAt: Date, now: Date): string {
	const hours = (now.getTime() - openedAt.getTime()) / 3_600_000;
	return hours >= 48 ? withUnit(Math.floor(hours / 24), 'days') : withUnit(Math.floor(hours), 'h');
}

export function digestEmail(snap: DigestSnapshot, recipientName: string, detail: settings.Settings['emailPatientDetail']) {
	const board = `${config.appUrl.replace(/\/$/, '')}/board`;
	const blocks: EmailBlock[] = [
		{ kind: 'paragraph', text: `Good morning, ${recipientName.split(' ')[0]}. This is what is waiting on the triage board.` },
		{ kind: 'heading', text: `On the board: ${snap.openTotal} open ${snap.openTotal === 1 ? 'flag' : 'flags'}` },
		{
			kind: 'facts',
			rows: [
				...SEVERITIES.map((s) => ({ label: severityLabel(s), value: String(snap.bySeverity[s]) })),
				{ label: 'Of these, awaiting a physician’s answer', value: String(snap.awaitingPhysician) },
				{ label: 'New since yesterday (opened in the last 24 h, still open)', value: String(snap.newSinceYesterday) }
			]
		},
		{ kind: 'heading', text: 'Waiting longest for a pharmacist' },
		snap.oldest.length
			? {
					kind: 'list',
					items: snap.oldest.map(
						(f) => `${severityLabel(f.severity)} · ${age(f.openedAt, snap.at)} · ${f.agentName} · ${patientLabel(f.patient, detail)} — ${f.finding}`
					)
				}
			: { kind: 'paragraph', text: 'No flag is waiting for a pharmacist. Nothing to claim this morning.' },
		...unansweredBlocks(snap, detail),
		{ kind: 'button', href: board, label: 'Open the triage board' }
	];
	return {
		subject: `Ebbline morning digest: ${snap.openTotal} open (${snap.bySeverity.high} high), ${snap.newSinceYesterday} new`,
		...renderEmail({
			title: 'Morning digest',
			preheader: `${snap.bySeverity.high} high, ${snap.bySeverity.moderate} moderate, ${snap.bySeverity.low} low; ${snap.newSinceYesterday} new since yesterday`,
			blocks,
			footer: 'Sent each morning by Ebbline to the stewardship pharmacists. The time is set by an administrator under Settings.'
		})
	};
}

/** Recommendations nobody answered after the reminders, and e-mails that could not be delivered. */
function unansweredBlocks(snap: DigestSnapshot, detail: settings.Settings['emailPatientDetail']): EmailBlock[] {
	const escalated = snap.escalated ?? [];
	const undeliverable = snap.undeliverable ?? 0;
	const blocks: EmailBlock[] = [];
	if (escalated.length > 0) {
		blocks.push(
			{ kind: 'heading', text: `Unanswered after the reminders: ${escalated.length}` },
			{
				kind: 'list',
				items: escalated.map(
					(r) =>
						`${r.agentName} · ${patientLabel(r.patient, detail)} — sent by ${r.pharmacistName} to ${r.to} ${age(r.sentAt, snap.at)} ago; call the physician or withdraw it`
				)
			}
		);
	}
	if (undeliverable > 0) {
		blocks.push({
			kind: 'paragraph',
			text: `${undeliverable} ${undeliverable === 1 ? 'e-mail' : 'e-mails'} from Ebbline could not be delivered and ${undeliverable === 1 ? 'waits' : 'wait'} for an administrator (Failed e-mail): resend, or record an answer taken by telephone.`
		});
	}
	return blocks;
}

/** The calendar day in the hospital's time zone, e.g. "2026-03-10": one digest per pharmacist per day. */
export function hospitalDay(at: Date, timeZone = config.hospitalTimeZone): string {
	return dayIn(timeZone, at);
}

/**
 * Queues today's digest for every active pharmacist who has not had it yet, in one transaction (a
 * retried or doubled cron run adds nothing: the outbox row per pharmacist and day is the guard, and
 * an advisory lock serialises concurrent runs).
 */
export async function queueMorningDigest(now = new Date()): Promise<{ queued: number; day: string }> {
	const day = hospitalDay(now);
	return getDb().transaction(async (tx) => {
		await tx.execute(sql`select pg_advisory_xact_lock(hashtext('digest.morning'))`);
		const s = await settings.get(tx);
		const pharmacists = await tx
			.select({ id: users.id, email: users.email, displayName: users.displayName })
			.from(users)
			.where(and(eq(users.role, 'pharmacist'), eq(users.active, true)));
		const already = new Set(
			(
				await tx
					.select({ relatedId: outboundEmails.relatedId })
					.from(outboundEmails)
					.where(and(eq(outboundEmails.relatedType, 'digest'), sql`${outboundEmails.relatedId} like ${day + ':%'}`))
			).map((r) => r.relatedId)
		);
		const snap = await snapshot(tx, now);
		let queued = 0;
		for (const p of pharmacists) {
			const relatedId = `${day}:${p.id}`;
			if (already.has(relatedId)) continue;
			await mail.queue(tx, { to: p.email, ...digestEmail(snap, p.displayName, s.emailPatientDetail), relatedType: 'digest', relatedId });
			queued += 1;
		}
		if (queued > 0) {
			await audit.record(
				{
					actorLabel: 'system',
					action: 'digest.queued',
					objectType: 'digest',
					objectId: day,
					after: { recipients: queued, ...snap.bySeverity, newSinceYesterday: snap.newSinceYesterday }
				},
				tx
			);
		}
		return { queued, day };
	});
}

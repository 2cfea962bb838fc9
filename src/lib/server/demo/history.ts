// Plays the Larkspur Bay Hospital's last N days through the product's own code paths, hour by hour:
// the hospital's feed messages (history-plan.ts) go through the feed and every affected order is
// re-assessed (rules and flags included) at the hour they arrived; each morning the pharmacist on duty
// works the triage board (history-team.ts decides what a careful pharmacist would do); physicians answer
// by e-mail link or in the app after a while, or not at all until reminded, escalated and telephoned;
// an accepted change reaches the order through the feed an hour or two later. Every service is called
// with the hour it happened, so the report, the audit log and a patient's history read as a real
// quarter. Deterministic for a given `now` and days: ids are random, decisions and times are not.
import { and, asc, desc, eq, isNotNull, sql } from 'drizzle-orm';
import type { ActingUser } from '../../domain/actor';
import { hashString, mulberry32 } from '../../domain/random';
import { getDb, type Database } from '../db';
import { flags, orders, outboundEmails, recommendations, users } from '../db/schema';
import { bundleSchema, ingestBundle } from '../feed';
import { act, wakeAllDue } from '../flags';
import { deliver } from '../mail';
import { notifications } from '../notifications';
import { reassessOrders } from '../reassess';
import { answer, answerByPhone, composeContext, escalateDue, escalatedOpen, linkAccess, remindDue, send, withdraw, withdrawStale } from '../recommendations';
import { bundle, orderEntry } from './hospital';
import { DAY_MS, HOUR_MS, hourlyFeed, planStays, type FeedDelivery, type PlannedOrder, type Stay } from './history-plan';
import { answerFor, phoneAnswerFor, roundOf, triage, type PlannedAnswer } from './history-team';

export type HistoryProgress = { day: number; days: number; messages: number };

export type HistorySummary = {
	days: number;
	stays: number;
	orders: number;
	messages: number;
	results: number;
	assessments: number;
	recommendations: number;
	answers: { accepted: number; modified: number; declined: number; byPhone: number; withdrawn: number };
	closedNoAction: number;
	snoozed: number;
	seconds: number;
};

const ACTOR = { actorId: null, actorLabel: 'hospital feed', requestId: null };
/** Where the history's e-mail goes: nowhere (its time has passed); the outbox keeps the record. */
const PAST_MAIL = { sendMail: async (m: Record<string, unknown>) => ({ messageId: String(m.messageId) }) };
const ANSWER_LINK = /\/respond\/([A-Za-z0-9_-]{43})/;

type Team = { pharmacists: ActingUser[]; physicians: Map<string, ActingUser> };

async function teamOf(db: Database): Promise<Team> {
	const rows = await db
		.select({ id: users.id, email: users.email, displayName: users.displayName, role: users.role })
		.from(users)
		.where(eq(users.active, true))
		.orderBy(asc(users.email));
	const acting = rows.map((u) => ({ ...u, requestId: null }));
	const pharmacists = acting.filter((u) => u.role === 'pharmacist' && u.email.endsWith('@larkspur.test'));
	if (pharmacists.length === 0) throw new Error('demo history: no demo pharmacist; seed the demo users first');
	return { pharmacists, physicians: new Map(acting.filter((u) => u.role === 'physician').map((u) => [u.id, u])) };
}

const asActor = (u: ActingUser) => ({ actorId: u.id, actorLabel: u.email, requestId: null, role: u.role });

/** Plays `days` days ending at `now`. The database must hold the demo users, agents and rule set, and no patients. */
export async function playHistory(options: { days: number; now?: Date; db?: Database; onProgress?: (p: HistoryProgress) => void }): Promise<HistorySummary> {
	const started = performance.now();
	const db = options.db ?? getDb();
	const now = options.now ?? new Date();
	const days = options.days;
	const start = now.getTime() - days * DAY_MS;
	const stays = planStays(now, days);
	const feed = hourlyFeed(stays, now, days);
	const team = await teamOf(db);
	const orderOf = new Map<string, { stay: Stay; order: PlannedOrder }>();
	for (const stay of stays) for (const order of stay.orders) orderOf.set(order.sourceId, { stay, order });

	const summary: HistorySummary = {
		days,
		stays: stays.length,
		orders: orderOf.size,
		messages: 0,
		results: 0,
		assessments: 0,
		recommendations: 0,
		answers: { accepted: 0, modified: 0, declined: 0, byPhone: 0, withdrawn: 0 },
		closedNoAction: 0,
		snoozed: 0,
		seconds: 0
	};
	const tokens = new Map<string, string>();
	const answers: PlannedAnswer[] = [];
	const changes: FeedDelivery[] = [];

	async function ingest(at: Date, entries: FeedDelivery['entries']) {
		const message = bundle(entries);
		const result = await ingestBundle(JSON.stringify(message), bundleSchema.parse(message), { source: 'seed', actor: ACTOR, now: at, db, enqueue: false });
		if (result.counts.quarantined > 0)
			throw new Error(`demo history: ${result.counts.quarantined} entries quarantined at ${at.toISOString()}: ${result.rejections[0]?.reason}`);
		summary.messages++;
		summary.results += entries.filter((e) => e.resource.resourceType === 'Observation').length;
		const ids = result.ordersToAssess ?? [];
		for (let i = 0; i < ids.length; i += 250) summary.assessments += (await reassessOrders(ids.slice(i, i + 250), { db, now: at })).assessed;
	}

	/** Hands the queued e-mail to no one, as delivered a minute after it was written; keeps each answer link for its physician. */
	async function deliverMail(at: Date) {
		const queued = await db
			.select({ id: outboundEmails.id, text: outboundEmails.text, relatedType: outboundEmails.relatedType, relatedId: outboundEmails.relatedId })
			.from(outboundEmails)
			.where(eq(outboundEmails.status, 'queued'));
		for (const mail of queued) {
			const link = ANSWER_LINK.exec(mail.text);
			if (link && mail.relatedType === 'recommendation' && mail.relatedId) tokens.set(mail.relatedId, link[1]);
			await deliver(mail.id, PAST_MAIL, { now: at });
		}
	}

	/** The prescriber changes the order as agreed, through the hospital's system (and so the feed) a little later. */
	function changeOrder(orderSourceId: string | null, regimen: { doseMg: number; intervalH: number; infusionH: number } | null, at: Date, key: string) {
		const planned = orderSourceId ? orderOf.get(orderSourceId) : undefined;
		if (!planned || !regimen) return;
		const { stay, order } = planned;
		const when = new Date(at.getTime() + (1 + mulberry32(hashString(key))()) * HOUR_MS);
		if (when.getTime() > now.getTime() || (order.stopAt && when >= order.stopAt)) return;
		const infusionH = order.route === 'po' ? 0 : Math.min(regimen.infusionH, regimen.intervalH);
		changes.push({
			at: when,
			entries: [orderEntry(stay.plan, order.sourceId, order.agentCode, order.route, { ...regimen, infusionH }, order.startAt, order.prescriber)]
		});
	}

	async function recommendationFacts(id: string) {
		const [row] = await db
			.select({
				status: recommendations.status,
				physicianId: recommendations.physicianId,
				proposed: recommendations.proposed,
				current: recommendations.current,
				order: orders.sourceId
			})
			.from(recommendations)
			.innerJoin(flags, eq(flags.id, recommendations.flagId))
			.innerJoin(orders, eq(orders.id, flags.orderId))
			.where(eq(recommendations.id, id));
		return row;
	}

	/** the prescriber without an account confirms with the e-mailed code before answering (the code itself is not simulated) */
	async function confirmedOnLink(recommendationId: string, at: Date) {
		const { confirmation } = await linkAccess.grantConfirmation(db, recommendationId, at);
		return { confirmation, user: null };
	}

	async function physicianAnswers(planned: PlannedAnswer) {
		const rec = await recommendationFacts(planned.recommendationId);
		// withdrawn meanwhile (the order stopped, the patient went home) or already answered by telephone
		if (!rec || rec.status !== 'sent') return;
		const given = answerFor(planned, rec.proposed as Regimen, rec.current as Regimen);
		const account = rec.physicianId ? team.physicians.get(rec.physicianId) : undefined;
		const token = tokens.get(planned.recommendationId);
		const result = account
			? await answer({ via: 'app', id: planned.recommendationId, user: account }, given, planned.at)
			: token
				? await answer({ via: 'link', token, access: await confirmedOnLink(planned.recommendationId, planned.at), requestId: null }, given, planned.at)
				: null;
		if (!result?.ok) return;
		summary.answers[given.outcome]++;
		if (given.outcome !== 'declined')
			changeOrder(rec.order, given.outcome === 'modified' ? given.regimen : (rec.proposed as Regimen), planned.at, `change:${planned.key}`);
	}

	/** The morning's board: escalations first (a telephone call), then yesterday's reviews, then new flags by priority. */
	async function workTheBoard(at: Date, dayIndex: number) {
		const round = roundOf(at, team.pharmacists);
		// four minutes a step, squeezed when the round is still going on at `now`
		const stepMs = Math.min(4 * 60_000, (now.getTime() - at.getTime()) / 80);
		let step = 0;
		const next = () => new Date(at.getTime() + step++ * stepMs);
		// the pharmacist starts with what the app told them since their last round
		await notifications.markRead(asActor(round.pharmacist), undefined, next());

		for (const esc of await escalatedOpen(db, 50)) {
			const rec = await recommendationFacts(esc.id);
			if (!rec || rec.status !== 'sent') continue;
			const phoned = phoneAnswerFor(`${rec.order}:${dayIndex}`);
			const when = next();
			if (phoned) {
				const result = await db.transaction((tx) => answerByPhone(tx, esc.id, phoned, round.pharmacist, when));
				if (result.ok) {
					summary.answers.byPhone++;
					if (phoned.outcome !== 'declined') changeOrder(rec.order, rec.proposed as Regimen, when, `phoned:${rec.order}:${dayIndex}`);
				}
			} else if ((await withdraw(esc.id, 'No answer by e-mail or telephone; the team will raise it on the ward round.', round.pharmacist, when)).ok) {
				summary.answers.withdrawn++;
			}
		}

		// reviews left open yesterday: the second look closes them
		const waiting = await db
			.select({ id: flags.id, holder: flags.assignedTo })
			.from(flags)
			.innerJoin(orders, eq(orders.id, flags.orderId))
			.where(
				and(
					eq(flags.state, 'in_review'),
					isNotNull(flags.assignedTo),
					sql`${flags.updatedAt} < ${new Date(at.getTime() - 20 * HOUR_MS).toISOString()}::timestamptz`
				)
			)
			.orderBy(asc(flags.openedAt), asc(orders.sourceId));
		for (const f of waiting) {
			const who = team.pharmacists.find((p) => p.id === f.holder) ?? round.pharmacist;
			const closed = await act(f.id, { kind: 'close', outcome: 'no_action', reason: 'Reviewed again with the new results: no change needed.' }, asActor(who), {
				now: next()
			});
			if (closed.ok) summary.closedNoAction++;
		}

		// every high-severity flag the same morning, then the others by priority as far as the round goes
		const waitingNew = await db
			.select({ id: flags.id, severity: flags.severity, ruleKey: flags.ruleKey, order: orders.sourceId })
			.from(flags)
			.innerJoin(orders, eq(orders.id, flags.orderId))
			.where(eq(flags.state, 'new'))
			.orderBy(desc(flags.priority), asc(orders.sourceId));
		const high = waitingNew.filter((f) => f.severity === 'high');
		const fresh = [...high, ...waitingNew.filter((f) => f.severity !== 'high').slice(0, Math.max(0, round.capacity - high.length))];
		for (const f of fresh) {
			const when = next();
			const claimed = await act(f.id, { kind: 'claim' }, asActor(round.pharmacist), { now: when });
			if (!claimed.ok) continue;
			const context = await composeContext(f.id);
			if (!context) continue;
			const decision = triage({ key: `${f.order}:${f.ruleKey}:${dayIndex}`, severity: f.severity, hasProposal: context.proposed !== null });
			if (decision.kind === 'recommend' && context.proposed) {
				const recipient = context.defaultRecipient ?? context.recipients.find((r) => !r.isPrescriber && r.email !== null)?.value;
				if (recipient) {
					const sent = await send(
						f.id,
						{
							doseMg: context.proposed.doseMg,
							intervalH: context.proposed.intervalH,
							infusionH: context.proposed.infusionH,
							loadingDoseMg: context.proposed.loadingDoseMg ?? null,
							recipient,
							message: context.draft,
							version: claimed.flag.version
						},
						round.pharmacist,
						{ now: when }
					);
					if (sent.ok) {
						summary.recommendations++;
						const planned = decision.answer(sent.recommendationId, when);
						if (planned) answers.push(planned);
						continue;
					}
				}
			}
			if (decision.kind === 'snooze') {
				if ((await act(f.id, { kind: 'snooze', until: null, untilNextResult: true }, asActor(round.pharmacist), { now: when })).ok) summary.snoozed++;
			} else if (decision.kind === 'review') {
				await act(f.id, { kind: 'note', note: decision.note }, asActor(round.pharmacist), { now: when });
			} else {
				const reason = decision.kind === 'close' ? decision.reason : 'Reviewed: no dose change proposed; the order stands.';
				if ((await act(f.id, { kind: 'close', outcome: 'no_action', reason }, asActor(round.pharmacist), { now: when })).ok) summary.closedNoAction++;
			}
		}
		await deliverMail(next());
	}

	let feedIndex = 0;
	for (let hour = Math.floor(start / HOUR_MS) + 1; hour * HOUR_MS <= now.getTime(); hour++) {
		const at = new Date(hour * HOUR_MS);
		// the physicians' answers due this hour, in the order they came
		answers.sort((a, b) => a.at.getTime() - b.at.getTime());
		while (answers.length > 0 && answers[0].at <= at) await physicianAnswers(answers.shift() as PlannedAnswer);
		// the hospital's messages for this hour, with the prescribers' changes that reached the feed
		const entries = [];
		while (feedIndex < feed.length && feed[feedIndex].at <= at) entries.push(...feed[feedIndex++].entries);
		changes.sort((a, b) => a.at.getTime() - b.at.getTime());
		while (changes.length > 0 && changes[0].at <= at) entries.push(...(changes.shift() as FeedDelivery).entries);
		if (entries.length > 0) await ingest(at, entries);
		// what the scheduled jobs do, at a coarser pace than in the app (the same work, fewer empty runs)
		if (hour % 3 === 0) {
			await wakeAllDue(at);
			await withdrawStale(at);
			await remindDue(at);
			await escalateDue(at);
			await deliverMail(at);
		}
		const dayIndex = Math.floor((at.getTime() - start) / DAY_MS);
		if (roundOf(at, team.pharmacists).isRoundHour) await workTheBoard(at, dayIndex);
		if (at.getUTCHours() === 0) options.onProgress?.({ day: dayIndex, days, messages: summary.messages });
	}
	summary.seconds = Math.round((performance.now() - started) / 100) / 10;
	return summary;
}

type Regimen = { doseMg: number; intervalH: number; infusionH: number; loadingDoseMg?: number | null };

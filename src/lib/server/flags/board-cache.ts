// The triage board's pages, cached in this process. Every pharmacist opening the board at 08:00 asks
// for the same page; it is read from PostgreSQL once and served from memory until something on it
// changes. Correctness rests on three things:
//   - a change to anything a board row shows fires NOTIFY ebbline_board (triggers in migration 0005,
//     delivered after commit, to every app process), and a notification drops every cached page;
//   - while the listening connection is down (or not yet up), nothing is served from the cache;
//   - a user who has just changed something in this process (any POST) reads past the cache for a
//     moment, so their own change shows even before its notification arrives.
// A page also expires after PAGE_TTL_MS, which bounds what time alone changes (a snooze running out).
// EBBLINE_BOARD_CACHE=off turns the cache off.
import postgres from 'postgres';
import { listeningClientOptions } from '../db/listening-client.js';
import { requireEnv } from '../config';
import { logger } from '../logger';
import type { BoardPage } from '../../flags/board';
import type { BoardQuery } from '../../validation/flags';
import { listBoard } from './queries';

const CHANNEL = 'ebbline_board';
const PAGE_TTL_MS = 5_000;
const MAX_PAGES = 500;
const OWN_WRITE_BYPASS_MS = 2_000;
const RELISTEN_MS = 2_000;

type Entry = { generation: number; expiresAt: number; body: Promise<Uint8Array<ArrayBuffer>> };

const pages = new Map<string, Entry>();
const lastWriteAt = new Map<string, number>();
let generation = 0;
let listening = false;
let stopped = false;
let client: postgres.Sql | null = null;
let retry: ReturnType<typeof setTimeout> | null = null;

const enabled = () => process.env.EBBLINE_BOARD_CACHE !== 'off' && !stopped;

/** Something on the board changed: forget every cached page. */
export function boardChanged() {
	generation++;
	pages.clear();
}

function scheduleListen() {
	if (retry || stopped) return;
	retry = setTimeout(() => {
		retry = null;
		void listen();
	}, RELISTEN_MS);
	retry.unref();
}

async function listen() {
	if (!client || stopped) return;
	try {
		await client.unsafe(`listen ${CHANNEL}`);
		listening = true;
		// notifications may have been missed while not listening
		boardChanged();
	} catch (error) {
		listening = false;
		logger.warn('board cache: cannot listen for changes; serving the board uncached', { error: (error as Error).message });
		scheduleListen();
	}
}

function startListening() {
	if (client || !enabled()) return;
	const options = listeningClientOptions({
		applicationName: 'ebbline-board-cache',
		onnotify: () => boardChanged(),
		onclose: () => {
			listening = false;
			boardChanged();
			scheduleListen();
		}
	});
	client = postgres(requireEnv('DATABASE_URL'), options);
	void listen();
}

/** Called after every state-changing request by a signed-in user. */
export function noteWrite(userId: string) {
	lastWriteAt.set(userId, Date.now());
	if (lastWriteAt.size > 10_000) lastWriteAt.clear();
}

const encoder = new TextEncoder();
const encode = (page: unknown) => encoder.encode(JSON.stringify(page));

/** One board page as UTF-8 JSON, from the cache when it may be (kept encoded: it is sent as it is). */
export async function boardPageJson(query: BoardQuery, userId: string): Promise<Uint8Array<ArrayBuffer>> {
	startListening();
	const now = Date.now();
	const ownWrite = now - (lastWriteAt.get(userId) ?? 0) < OWN_WRITE_BYPASS_MS;
	if (!enabled() || !listening || ownWrite) return encode(await listBoard(query, userId));
	// "mine" pages differ per user; every other page is the same for every pharmacist
	const key = JSON.stringify([query.mine ? userId : null, query]);
	const hit = pages.get(key);
	if (hit && hit.generation === generation && hit.expiresAt > now) return hit.body;
	const body = listBoard(query, userId).then(encode);
	pages.set(key, { generation, expiresAt: now + PAGE_TTL_MS, body });
	if (pages.size > MAX_PAGES) pages.delete(pages.keys().next().value as string);
	body.catch(() => {
		if (pages.get(key)?.body === body) pages.delete(key);
	});
	return body;
}

const decoder = new TextDecoder();

/** The same page as boardPageJson, read into objects (the board page's server load renders it). */
export async function boardPage(query: BoardQuery, userId: string): Promise<BoardPage> {
	return JSON.parse(decoder.decode(await boardPageJson(query, userId))) as BoardPage;
}

export async function stopBoardCache() {
	stopped = true;
	if (retry) clearTimeout(retry);
	retry = null;
	pages.clear();
	listening = false;
	const c = client;
	client = null;
	if (c) await c.end({ timeout: 2 });
}

import { index, integer, jsonb, pgEnum, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import { at, createdAt, id } from './columns';
import { feedTokens, users } from './auth';

export const feedSourceEnum = pgEnum('feed_source', ['fhir', 'csv', 'simulator', 'seed']);

/** Every inbound message, stored raw once; the content hash makes re-sending idempotent. */
export const feedMessages = pgTable(
	'feed_messages',
	{
		id: id(),
		source: feedSourceEnum().notNull(),
		contentHash: text().notNull().unique(),
		tokenId: uuid().references(() => feedTokens.id),
		uploadedBy: uuid().references(() => users.id),
		raw: text().notNull(),
		entryCount: integer().notNull(),
		summary: jsonb().notNull().default({}),
		receivedAt: createdAt()
	},
	(t) => [index('feed_messages_received_idx').on(t.receivedAt)]
);

export const quarantineStatusEnum = pgEnum('quarantine_status', ['open', 'reprocessed', 'discarded']);

/** Inbound records that failed validation, kept with the reason; never silently dropped. */
export const quarantine = pgTable(
	'quarantine',
	{
		id: id(),
		messageId: uuid().references(() => feedMessages.id),
		source: feedSourceEnum().notNull(),
		entryIndex: integer(),
		resourceType: text(),
		reason: text().notNull(),
		field: text(),
		raw: jsonb().notNull(),
		status: quarantineStatusEnum().notNull().default('open'),
		decidedBy: uuid().references(() => users.id),
		decidedAt: at(),
		decisionNote: text(),
		createdAt: createdAt()
	},
	(t) => [index('quarantine_status_idx').on(t.status, t.createdAt)]
);

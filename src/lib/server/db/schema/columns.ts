import { timestamp, uuid } from 'drizzle-orm/pg-core';

/** Shared column helpers: every table names its ids and times the same way. */
export const id = () => uuid().primaryKey().defaultRandom();
export const at = () => timestamp({ withTimezone: true, mode: 'date' });
export const createdAt = () => at().notNull().defaultNow();
export const updatedAt = () =>
	at()
		.notNull()
		.defaultNow()
		.$onUpdate(() => new Date());

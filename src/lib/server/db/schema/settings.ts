import { jsonb, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import { updatedAt } from './columns';
import { users } from './auth';

/** Administrator settings, one row per key; values are validated by the settings service. */
export const settings = pgTable('settings', {
	key: text().primaryKey(),
	value: jsonb().notNull(),
	updatedBy: uuid().references(() => users.id),
	updatedAt: updatedAt()
});

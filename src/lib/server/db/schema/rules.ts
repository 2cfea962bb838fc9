import { sql } from 'drizzle-orm';
import { index, integer, jsonb, pgEnum, pgTable, text, uniqueIndex, uuid } from 'drizzle-orm/pg-core';
import { at, createdAt, id } from './columns';
import { users } from './auth';

export const ruleVersionStatusEnum = pgEnum('rule_version_status', ['draft', 'active', 'retired']);

/**
 * A rule set is versioned as a whole: each save makes a draft, publishing makes it the one active
 * version (a partial unique index keeps it to one, whatever two admins do at once).
 */
export const ruleVersions = pgTable(
	'rule_versions',
	{
		id: id(),
		version: integer().notNull().unique(),
		status: ruleVersionStatusEnum().notNull().default('draft'),
		rules: jsonb().notNull(), // RuleDefinition[] from src/lib/rules
		note: text(),
		basedOn: uuid(),
		authorId: uuid().references(() => users.id),
		createdAt: createdAt(),
		publishedAt: at(),
		publishedBy: uuid().references(() => users.id)
	},
	(t) => [
		uniqueIndex('rule_versions_one_active')
			.on(t.status)
			.where(sql`${t.status} = 'active'`),
		index('rule_versions_status_idx').on(t.status)
	]
);

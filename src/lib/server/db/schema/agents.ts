import { boolean, jsonb, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import type { AgentParams } from '../../../clinical/types';
import { id, updatedAt } from './columns';
import { users } from './auth';

/** The agent library. `params` is the clinical core's AgentParams; `provenance` tags each value. */
export const agents = pgTable('agents', {
	id: id(),
	code: text().notNull().unique(), // ATC
	rxnormCode: text(),
	name: text().notNull(),
	agentClass: text().notNull(),
	synonyms: text().array().notNull().default([]),
	params: jsonb().$type<AgentParams>().notNull(),
	provenance: jsonb().$type<Record<string, string>>().notNull().default({}),
	active: boolean().notNull().default(true),
	updatedBy: uuid().references(() => users.id),
	updatedAt: updatedAt()
});

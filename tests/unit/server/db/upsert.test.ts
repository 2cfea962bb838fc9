// takeIncoming writes `excluded.<column>` under the client's snake_case casing (drizzle-orm's own
// conversion), and keeps a name the schema gives explicitly.
import { PgDialect, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import { describe, expect, it } from 'vitest';
import { takeIncoming } from '../../../../src/lib/server/db/upsert';
import { drugLevels } from '../../../../src/lib/server/db/schema';

const dialect = new PgDialect({ casing: 'snake_case' });
const rendered = (set: Record<string, Parameters<PgDialect['sqlToQuery']>[0]>) =>
	Object.fromEntries(Object.entries(set).map(([k, v]) => [k, dialect.sqlToQuery(v).sql]));

describe('takeIncoming', () => {
	it('names each column as PostgreSQL knows it', () => {
		expect(rendered(takeIncoming(drugLevels, ['patientId', 'valueMgL', 'observedAt', 'unit']))).toEqual({
			patientId: 'excluded."patient_id"',
			valueMgL: 'excluded."value_mg_l"',
			observedAt: 'excluded."observed_at"',
			unit: 'excluded."unit"'
		});
	});

	it('keeps a column name the schema sets', () => {
		const t = pgTable('t', { id: uuid().primaryKey(), oddOne: text('Odd_Name') });
		expect(rendered(takeIncoming(t, ['oddOne']))).toEqual({ oddOne: 'excluded."Odd_Name"' });
	});
});

// Helpers for idempotent upserts (INSERT … ON CONFLICT DO UPDATE).
import { getTableColumns, sql, type SQL } from 'drizzle-orm';
import { toSnakeCase } from 'drizzle-orm/casing';
import type { PgTable } from 'drizzle-orm/pg-core';

/**
 * onConflictDoUpdate's `set` for columns that take the incoming row's value: each key becomes
 * `excluded.<its column>`. Spread it beside columns set otherwise (a coalesce, the intake's clock).
 * Column names follow the client's snake_case casing (db/index.ts) unless the schema names them.
 */
export function takeIncoming<T extends PgTable, K extends keyof T['_']['columns'] & string>(table: T, keys: readonly K[]): Record<K, SQL> {
	const columns = getTableColumns(table) as Record<string, { name: string; keyAsName: boolean }>;
	const columnName = (key: K) => (columns[key].keyAsName ? toSnakeCase(columns[key].name) : columns[key].name);
	return Object.fromEntries(keys.map((key) => [key, sql`excluded.${sql.identifier(columnName(key))}`])) as Record<K, SQL>;
}

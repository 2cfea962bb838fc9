import { sql } from 'drizzle-orm';
import { backTest } from './src/lib/server/rules';
import { getDb, closeDb } from './src/lib/server/db';
const [v] = Array.from(await getDb().execute(sql`select id, version, rules from rule_versions where status = 'draft' order by version desc limit 1`)) as any[];
for (const batchSize of [500, 1000]) {
const r = await backTest({ id: v.id, version: v.version, rules: v.rules }, { days: 90, batchSize });
console.log('backtest', batchSize, r.ms, 'orders', r.orders, 'orderDays', r.orderDays, JSON.stringify(r.byRule['dose-above-band']));
}
await closeDb();

/**
 * A fingerprint of the whole database for "bad input changes nothing": the row count and an md5 of every row's
 * text, per table of the public schema (found in the catalogue, so a new table is covered without a change here).
 */
import { sql } from 'drizzle-orm';
import { getDb } from '../../src/server/db';

/**
 * Tables that legitimately change while the app only reads or signs people in, so comparing them would make
 * the check flaky without saying anything about writes:
 * - session: better-auth refreshes a session's expiry as it is used, and signing in adds one;
 * - rate_limit: better-auth counts requests per client, refused ones included;
 * - verification: better-auth's one-time tokens (e-mail verification, password reset) come and go with sign-ins;
 * - jobs: progress rows of background work (bootstrap, reports) that the workers update on their own schedule.
 * The pg-boss queue lives in its own schema (pgboss), which is not fingerprinted for the same reason as jobs.
 */
export const UNFINGERPRINTED_TABLES = ['session', 'rate_limit', 'verification', 'jobs'] as const;

/**
 * Columns left out of a table's fingerprint, with the reason:
 * - api_tokens.last_used_at is stamped by the middleware whenever a token is presented, whatever the answer.
 */
const UNFINGERPRINTED_COLUMNS: Record<string, string[]> = { api_tokens: ['last_used_at'] };

export type DbFingerprint = Record<string, { rows: number; md5: string }>;

/** Row count and md5 of every fingerprinted table, by table name. */
export async function dbFingerprint(): Promise<DbFingerprint> {
  const db = getDb();
  const tables = await db.execute<{ name: string }>(sql`
    select table_name as name from information_schema.tables
    where table_schema = 'public' and table_type = 'BASE TABLE'
    order by table_name`);
  const fingerprint: DbFingerprint = {};
  for (const { name } of tables.rows) {
    if ((UNFINGERPRINTED_TABLES as readonly string[]).includes(name)) continue;
    const dropped = UNFINGERPRINTED_COLUMNS[name] ?? [];
    // jsonb of the row so that columns can be dropped by name; its text is canonical (keys sorted).
    const rowText = dropped.length ? `(to_jsonb(t) - array[${dropped.map((c) => `'${c}'`).join(', ')}])::text` : 'to_jsonb(t)::text';
    const result = await db.execute<{ rows: number; md5: string }>(
      sql.raw(`select count(*)::int as rows, md5(coalesce(string_agg(${rowText}, '|' order by ${rowText}), '')) as md5 from "${name}" t`),
    );
    fingerprint[name] = result.rows[0];
  }
  return fingerprint;
}

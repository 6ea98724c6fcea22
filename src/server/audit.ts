/**
 * The audit trail: append-only, one hash chain per laboratory (and one for events outside any laboratory,
 * such as a failed sign-in for an unknown address). Each event's hash is sha256(previous hash + "\n" +
 * canonical content), so changing or deleting any row breaks every link after it.
 */
import { createHash } from 'node:crypto';
import { and, asc, eq, isNull, sql } from 'drizzle-orm';
import { canonicalJson } from '../lib/canonicalJson';
import type { Database } from '../db/client';
import { auditEvents } from '../db/schema';

export const GENESIS_HASH = '0'.repeat(64);

/** A transaction or the pool: audit events are written in the same transaction as the change they record. */
export type Executor = Pick<Database, 'select' | 'insert' | 'execute'>;

export interface AuditInput {
  laboratoryId: string | null;
  actorUserId: string | null;
  action: string;
  entityType: string;
  entityId?: string | null;
  data?: Record<string, unknown>;
}

type AuditRow = typeof auditEvents.$inferSelect;

function contentOf(event: Pick<AuditRow, 'laboratoryId' | 'actorUserId' | 'action' | 'entityType' | 'entityId' | 'data' | 'occurredAt'>) {
  return canonicalJson({
    laboratoryId: event.laboratoryId,
    actorUserId: event.actorUserId,
    action: event.action,
    entityType: event.entityType,
    entityId: event.entityId,
    data: event.data,
    occurredAt: event.occurredAt.toISOString(),
  });
}

/** sha256 of the previous hash and this event's canonical content. */
export function chainHash(prevHash: string, event: Parameters<typeof contentOf>[0]): string {
  return createHash('sha256').update(`${prevHash}\n${contentOf(event)}`).digest('hex');
}

const labScope = (laboratoryId: string | null) =>
  laboratoryId ? eq(auditEvents.laboratoryId, laboratoryId) : isNull(auditEvents.laboratoryId);

/**
 * The arguments of append_audit_event (drizzle/0005_audit_append.sql) for one event, in its parameter order
 * (laboratory, actor, action, entity type, entity id, data as JSON, time as ISO text, canonical content), with the
 * event as it will be stored; for a statement that appends its own event (src/server/results.ts, a new grid row).
 *
 * @example
 * const { event, args } = auditArguments({ laboratoryId, actorUserId, action: 'sample.created', entityType: 'sample', entityId });
 */
export function auditArguments(input: AuditInput) {
  const event = {
    laboratoryId: input.laboratoryId,
    actorUserId: input.actorUserId,
    action: input.action,
    entityType: input.entityType,
    entityId: input.entityId ?? null,
    data: input.data ?? {},
    occurredAt: new Date(),
  };
  const args = [event.laboratoryId, event.actorUserId, event.action, event.entityType, event.entityId, JSON.stringify(event.data), event.occurredAt.toISOString(), contentOf(event)] as const;
  return { event, args };
}

/**
 * Appends one event to its laboratory's chain. Call it inside the transaction that makes the change, as its last
 * statement: the chain's advisory lock (taken by append_audit_event, drizzle/0005_audit_append.sql, which also reads
 * the last hash and stores sha256(previous hash + "\n" + content)) keeps concurrent writers from forking the chain
 * and is held until that transaction commits.
 *
 * @example
 * await recordAudit(tx, { laboratoryId, actorUserId: user.id, action: 'study.opened', entityType: 'study', entityId: study.id });
 */
export async function recordAudit(tx: Executor, input: AuditInput): Promise<AuditRow> {
  const { event, args } = auditArguments(input);
  const [laboratoryId, actorUserId, action, entityType, entityId, data, occurredAt, content] = args;
  const { rows } = await tx.execute<StoredAuditRow>(
    sql`select * from append_audit_event(${laboratoryId}::uuid, ${actorUserId}, ${action}, ${entityType}, ${entityId}, ${data}::jsonb, ${occurredAt}::timestamptz, ${content})`,
  );
  const [row] = rows;
  return { ...event, id: Number(row.id), data: row.data, prevHash: row.prev_hash, hash: row.hash };
}

/** The columns of append_audit_event's row that the stored event adds to what the caller gave. */
interface StoredAuditRow extends Record<string, unknown> {
  id: string;
  data: unknown;
  prev_hash: string;
  hash: string;
}

export type ChainReport =
  | { intact: true; events: number; lastHash: string }
  | { intact: false; events: number; brokenAt: { id: number; problem: string } };

/** Walks a laboratory's chain from its first event and reports it intact or the first broken link. */
export async function verifyChain(db: Executor, laboratoryId: string | null): Promise<ChainReport> {
  const rows = await db.select().from(auditEvents).where(labScope(laboratoryId)).orderBy(asc(auditEvents.id));
  let expectedPrev = GENESIS_HASH;
  for (const row of rows) {
    if (row.prevHash !== expectedPrev) {
      return { intact: false, events: rows.length, brokenAt: { id: row.id, problem: 'its link to the previous event does not match (an event before it was changed or removed)' } };
    }
    if (chainHash(row.prevHash, row) !== row.hash) {
      return { intact: false, events: rows.length, brokenAt: { id: row.id, problem: 'its content does not match its hash (this event was changed)' } };
    }
    expectedPrev = row.hash;
  }
  return { intact: true, events: rows.length, lastHash: expectedPrev };
}

export async function auditTrail(db: Executor, laboratoryId: string, filter: { entityId?: string } = {}) {
  return db
    .select()
    .from(auditEvents)
    .where(and(eq(auditEvents.laboratoryId, laboratoryId), filter.entityId ? eq(auditEvents.entityId, filter.entityId) : undefined))
    .orderBy(asc(auditEvents.id));
}

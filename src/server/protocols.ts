/**
 * Protocols and their versions. A version is a draft (editable, autosaved) until a lab scientist approves it;
 * an approved version is frozen (this service refuses changes, and a database trigger refuses them too).
 * Editing an approved protocol starts the next version as a draft copy of the approved settings.
 */
import { and, asc, desc, eq, type SQL } from 'drizzle-orm';
import { alias } from 'drizzle-orm/pg-core';
import { getDb } from './db';
import { protocols, protocolVersions, user } from '../db/schema';
import { notFound } from './problem';
import type { ProtocolSettings } from '../lib/protocolSchema';

const UUID = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i;

/** A malformed id names nothing, so it is answered like a missing one (and never reaches PostgreSQL's uuid parser). */
const isUuid = (id: string) => UUID.test(id);

const approver = alias(user, 'approver');

/** An approved protocol version as studies see it. */
export interface ApprovedVersion {
  id: string;
  protocolId: string;
  title: string;
  analyte: string;
  versionNumber: number;
  approvedBy: string;
  approvedByName: string;
  approvedAt: Date;
  settings: ProtocolSettings;
}

function approvedVersionsQuery(laboratoryId: string, only?: SQL) {
  return getDb()
    .select({
      id: protocolVersions.id,
      protocolId: protocols.id,
      title: protocols.title,
      analyte: protocols.analyte,
      versionNumber: protocolVersions.versionNumber,
      approvedBy: protocolVersions.approvedBy,
      approvedByName: approver.name,
      approvedAt: protocolVersions.approvedAt,
      settings: protocolVersions.settings,
    })
    .from(protocolVersions)
    .innerJoin(protocols, eq(protocols.id, protocolVersions.protocolId))
    .innerJoin(approver, eq(approver.id, protocolVersions.approvedBy))
    .where(and(eq(protocolVersions.laboratoryId, laboratoryId), eq(protocolVersions.status, 'approved'), only));
}

type ApprovedRow = Awaited<ReturnType<typeof approvedVersionsQuery>>[number];

/** The approval check constraint guarantees approvedBy/approvedAt on approved rows; this narrows the types. */
const toApproved = (row: ApprovedRow): ApprovedVersion => ({
  ...row,
  approvedBy: row.approvedBy!,
  approvedAt: row.approvedAt!,
  settings: row.settings as ProtocolSettings,
});

/**
 * The laboratory's approved protocol versions (the ones a study may pin), by protocol title then newest version first.
 *
 * @example
 * const versions = await listApprovedVersions(lab.id);
 * versions[0]; // { id, protocolId, title: 'Glucose method comparison', analyte: 'Glucose', versionNumber: 2, approvedByName: 'Dr …', approvedAt, settings }
 */
export async function listApprovedVersions(laboratoryId: string): Promise<ApprovedVersion[]> {
  const rows = await approvedVersionsQuery(laboratoryId).orderBy(asc(protocols.title), desc(protocolVersions.versionNumber));
  return rows.map(toApproved);
}

/**
 * One approved version of the laboratory, or a 404 Problem (also for a draft, another lab's version or a malformed id).
 *
 * @example
 * const version = await getApprovedVersion(lab.id, body.protocolVersionId); // throws notFound('approved protocol version')
 */
export async function getApprovedVersion(laboratoryId: string, versionId: string): Promise<ApprovedVersion> {
  if (!isUuid(versionId)) throw notFound('approved protocol version');
  const [row] = await approvedVersionsQuery(laboratoryId, eq(protocolVersions.id, versionId));
  if (!row) throw notFound('approved protocol version');
  return toApproved(row);
}

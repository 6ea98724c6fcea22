/**
 * Protocols and their versions. A version is a draft (editable, autosaved) until a lab scientist approves it;
 * an approved version is frozen (this service refuses changes, and a database trigger refuses them too).
 * Editing an approved protocol starts the next version as a draft copy of the approved settings.
 */
import { and, asc, desc, eq, sql, type SQL } from 'drizzle-orm';
import { alias } from 'drizzle-orm/pg-core';
import { z } from 'zod';
import { getDb } from './db';
import { protocols, protocolVersions, user } from '../db/schema';
import { recordAudit } from './audit';
import { sha256 } from './laboratories';
import { conflict, fieldErrorsFromZod, invalid, notFound } from './problem';
import { loadTemplate } from './templates';
import { canonicalJson } from '../lib/canonicalJson';
import { blankSettings, defaultSettingsFromTemplate, protocolSettingsSchema, type ProtocolSettings } from '../lib/protocolSchema';

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
      // A later draft may retitle the protocol; an approved version keeps its own words.
      title: sql<string>`${protocolVersions.settings}->>'title'`,
      analyte: sql<string>`${protocolVersions.settings}->'analyte'->>'name'`,
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
  const rows = await approvedVersionsQuery(laboratoryId).orderBy(asc(sql`${protocolVersions.settings}->>'title'`), desc(protocolVersions.versionNumber));
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

// ---------------------------------------------------------------------------------------------
// Request bodies (shared by the endpoints)

/**
 * A draft's settings as autosaved: the form as it stands, possibly incomplete, so only its shape is checked here;
 * approval checks it in full with protocolSettingsSchema.
 *
 * @example
 * protocolDraftSchema.parse({ title: 'Glucose', samplePlan: { count: null } }); // passes
 */
export const protocolDraftSchema = z.looseObject({
  title: z.string().max(200, 'Keep the title under 200 characters.').optional(),
  analyte: z.looseObject({ name: z.string().max(200, 'Keep the analyte name under 200 characters.').optional() }).optional(),
});

/**
 * Body of "start a protocol": from a template (its id) or blank (no id).
 *
 * @example
 * createProtocolBodySchema.parse({ templateId: 'glucose' });
 */
export const createProtocolBodySchema = z.object({
  templateId: z.string().regex(/^[a-z0-9]+(?:-[a-z0-9]+)*$/, 'A template id is kebab-case, e.g. "free-t4".').optional(),
});

/**
 * Body of "save the draft": the settings and the row version the edit started from.
 *
 * @example
 * saveDraftBodySchema.parse({ settings: form.getValues(), version: 3 });
 */
export const saveDraftBodySchema = z.object({
  settings: protocolDraftSchema,
  version: z.int('The version is a whole number.').min(1),
});

/**
 * Body of "approve": the row version the approver saw.
 *
 * @example
 * approveBodySchema.parse({ version: 4 });
 */
export const approveBodySchema = z.object({ version: z.int('The version is a whole number.').min(1) });

// ---------------------------------------------------------------------------------------------
// Reading

const creator = alias(user, 'creator');

/** One version as the pages and the designer see it. */
export interface ProtocolVersionView {
  id: string;
  protocolId: string;
  versionNumber: number;
  status: 'draft' | 'approved';
  templateId: string | null;
  settings: Record<string, unknown>;
  version: number;
  createdByName: string;
  createdAt: Date;
  updatedAt: Date;
  approvedByName: string | null;
  approvedAt: Date | null;
}

function versionsQuery(laboratoryId: string, only?: SQL) {
  return getDb()
    .select({
      id: protocolVersions.id,
      protocolId: protocolVersions.protocolId,
      versionNumber: protocolVersions.versionNumber,
      status: protocolVersions.status,
      templateId: protocolVersions.templateId,
      settings: protocolVersions.settings,
      version: protocolVersions.version,
      createdByName: creator.name,
      createdAt: protocolVersions.createdAt,
      updatedAt: protocolVersions.updatedAt,
      approvedByName: approver.name,
      approvedAt: protocolVersions.approvedAt,
    })
    .from(protocolVersions)
    .innerJoin(creator, eq(creator.id, protocolVersions.createdBy))
    .leftJoin(approver, eq(approver.id, protocolVersions.approvedBy))
    .where(and(eq(protocolVersions.laboratoryId, laboratoryId), only))
    .orderBy(desc(protocolVersions.versionNumber));
}

const asView = (row: Awaited<ReturnType<typeof versionsQuery>>[number]): ProtocolVersionView => ({
  ...row,
  settings: row.settings as Record<string, unknown>,
});

/** A protocol with its versions, newest first. */
export interface ProtocolWithVersions {
  id: string;
  title: string;
  analyte: string;
  createdAt: Date;
  versions: ProtocolVersionView[];
}

/**
 * The laboratory's protocols, newest first, each with all its versions (newest first) and who approved them.
 *
 * @example
 * const protocols = await listProtocols(lab.id);
 * protocols[0].versions.map((v) => `${v.versionNumber} ${v.status} ${v.approvedByName ?? ''}`);
 */
export async function listProtocols(laboratoryId: string): Promise<ProtocolWithVersions[]> {
  const [protocolRows, versionRows] = await Promise.all([
    getDb()
      .select({ id: protocols.id, title: protocols.title, analyte: protocols.analyte, createdAt: protocols.createdAt })
      .from(protocols)
      .where(eq(protocols.laboratoryId, laboratoryId))
      .orderBy(desc(protocols.createdAt)),
    versionsQuery(laboratoryId),
  ]);
  return protocolRows.map((protocol) => ({
    ...protocol,
    versions: versionRows.filter((v) => v.protocolId === protocol.id).map(asView),
  }));
}

/**
 * One protocol of the laboratory with its versions, or a 404 Problem.
 *
 * @example
 * const protocol = await getProtocol(lab.id, params.protocolId!);
 * protocol.versions[0]; // the newest version (a draft while one is being edited)
 */
export async function getProtocol(laboratoryId: string, protocolId: string): Promise<ProtocolWithVersions> {
  if (!isUuid(protocolId)) throw notFound('protocol');
  const [protocol] = await getDb()
    .select({ id: protocols.id, title: protocols.title, analyte: protocols.analyte, createdAt: protocols.createdAt })
    .from(protocols)
    .where(and(eq(protocols.laboratoryId, laboratoryId), eq(protocols.id, protocolId)));
  if (!protocol) throw notFound('protocol');
  const versions = await versionsQuery(laboratoryId, eq(protocolVersions.protocolId, protocolId));
  return { ...protocol, versions: versions.map(asView) };
}

/**
 * One version of one of the laboratory's protocols, or a 404 Problem.
 *
 * @example
 * const version = await getVersion(lab.id, protocolId, versionId); // { status: 'draft', settings, version: 3, … }
 */
export async function getVersion(laboratoryId: string, protocolId: string, versionId: string): Promise<ProtocolVersionView> {
  if (!isUuid(protocolId) || !isUuid(versionId)) throw notFound('protocol version');
  const [row] = await versionsQuery(laboratoryId, and(eq(protocolVersions.protocolId, protocolId), eq(protocolVersions.id, versionId)));
  if (!row) throw notFound('protocol version');
  return asView(row);
}

// ---------------------------------------------------------------------------------------------
// Changing

/** The protocol's list columns follow its newest draft; an empty title stays empty and is shown as untitled. */
function listColumns(settings: z.output<typeof protocolDraftSchema>) {
  return { title: (settings.title ?? '').trim(), analyte: (settings.analyte?.name ?? '').trim() };
}

const settingsHash = (settings: unknown) => sha256(canonicalJson(settings));

/**
 * Starts a protocol as version 1, a draft: the template's default settings (defaultSettingsFromTemplate) or blank ones.
 *
 * @example
 * const { protocol, version } = await createProtocol(user.id, lab.id, { templateId: 'glucose' });
 */
export async function createProtocol(actorId: string, laboratoryId: string, body: z.output<typeof createProtocolBodySchema>) {
  let settings: ProtocolSettings;
  if (body.templateId) {
    const template = loadTemplate(body.templateId);
    if (!template) throw invalid('There is no template with that id.', [{ field: 'templateId', message: `No analyte template "${body.templateId}".` }]);
    settings = defaultSettingsFromTemplate(template);
  } else {
    settings = blankSettings();
  }
  return getDb().transaction(async (tx) => {
    const [protocol] = await tx
      .insert(protocols)
      .values({ laboratoryId, createdBy: actorId, ...listColumns(settings) })
      .returning();
    const [version] = await tx
      .insert(protocolVersions)
      .values({ protocolId: protocol.id, laboratoryId, versionNumber: 1, status: 'draft', templateId: body.templateId ?? null, settings, createdBy: actorId })
      .returning();
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actorId,
      action: 'protocol.created',
      entityType: 'protocol',
      entityId: protocol.id,
      data: { versionId: version.id, templateId: body.templateId ?? null },
    });
    return { protocol, version };
  });
}

type Tx = Parameters<Parameters<ReturnType<typeof getDb>['transaction']>[0]>[0];

/** Locks one version of the lab's protocol for a change and checks it is a draft at the version the caller saw. */
async function lockDraft(tx: Tx, laboratoryId: string, protocolId: string, versionId: string, expectedVersion: number) {
  if (!isUuid(protocolId) || !isUuid(versionId)) throw notFound('protocol version');
  const [current] = await tx
    .select()
    .from(protocolVersions)
    .where(and(eq(protocolVersions.id, versionId), eq(protocolVersions.protocolId, protocolId), eq(protocolVersions.laboratoryId, laboratoryId)))
    .for('update');
  if (!current) throw notFound('protocol version');
  if (current.status === 'approved') {
    throw conflict(`Version ${current.versionNumber} is approved and frozen; edit the protocol to start version ${current.versionNumber + 1} instead.`, { current });
  }
  if (current.version !== expectedVersion) {
    throw conflict('This draft was saved by someone else (or in another window) since you opened it; reload to see the current draft.', { current });
  }
  return current;
}

/**
 * Saves a draft version's settings (autosave). Stale `version` → 409 with the current row; approved → 409.
 * Returns the saved row and the field errors that would stop approval, so the designer can show them.
 *
 * @example
 * const { version } = await saveDraft(user.id, lab.id, protocolId, versionId, { settings, version: 3 }); // version.version === 4
 */
export async function saveDraft(
  actorId: string,
  laboratoryId: string,
  protocolId: string,
  versionId: string,
  body: z.output<typeof saveDraftBodySchema>,
) {
  const saved = await getDb().transaction(async (tx) => {
    const current = await lockDraft(tx, laboratoryId, protocolId, versionId, body.version);
    const [updated] = await tx
      .update(protocolVersions)
      .set({ settings: body.settings, version: current.version + 1, updatedAt: new Date() })
      .where(eq(protocolVersions.id, versionId))
      .returning();
    await tx.update(protocols).set(listColumns(body.settings)).where(eq(protocols.id, protocolId));
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actorId,
      action: 'protocol.draft_saved',
      entityType: 'protocol_version',
      entityId: versionId,
      data: { protocolId, versionNumber: current.versionNumber, rowVersion: updated.version, settingsHash: settingsHash(body.settings) },
    });
    return updated;
  });
  const check = protocolSettingsSchema.safeParse(body.settings);
  return { version: saved, approvalErrors: check.success ? [] : fieldErrorsFromZod(check.error) };
}

/**
 * Approves a draft: its settings must pass protocolSettingsSchema (else 422 with each field's error); the parsed
 * settings (defaults filled in) are frozen with the approver and the time, and audited with their hash.
 *
 * @example
 * const approved = await approveVersion(user.id, lab.id, protocolId, versionId, { version: 4 }); // approved.status === 'approved'
 */
export async function approveVersion(
  actorId: string,
  laboratoryId: string,
  protocolId: string,
  versionId: string,
  body: z.output<typeof approveBodySchema>,
) {
  return getDb().transaction(async (tx) => {
    const current = await lockDraft(tx, laboratoryId, protocolId, versionId, body.version);
    const parsed = protocolSettingsSchema.safeParse(current.settings);
    if (!parsed.success) {
      const errors = fieldErrorsFromZod(parsed.error);
      throw invalid(`The protocol cannot be approved yet: ${errors.length} field${errors.length === 1 ? '' : 's'} need attention.`, errors);
    }
    const approvedAt = new Date();
    const [approved] = await tx
      .update(protocolVersions)
      .set({ settings: parsed.data, status: 'approved', approvedBy: actorId, approvedAt, version: current.version + 1, updatedAt: approvedAt })
      .where(eq(protocolVersions.id, versionId))
      .returning();
    await tx.update(protocols).set(listColumns(parsed.data)).where(eq(protocols.id, protocolId));
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actorId,
      action: 'protocol.approved',
      entityType: 'protocol_version',
      entityId: versionId,
      data: { protocolId, versionNumber: current.versionNumber, settingsHash: settingsHash(parsed.data) },
    });
    return approved;
  });
}

/**
 * Discards a draft version (the row version the caller saw, else 409; an approved version answers 409 too).
 * A protocol that was never approved goes with its only draft; otherwise the protocol is back at its newest
 * approved version, whose settings the list shows again. Drafts are never used by a study, so nothing else changes.
 * Audited as 'protocol.draft_discarded' with the discarded settings' hash.
 *
 * @example
 * const { protocolDeleted } = await discardDraft(user.id, lab.id, protocolId, versionId, { version: 7 });
 */
export async function discardDraft(
  actorId: string,
  laboratoryId: string,
  protocolId: string,
  versionId: string,
  body: z.output<typeof approveBodySchema>,
): Promise<{ protocolDeleted: boolean }> {
  return getDb().transaction(async (tx) => {
    // the protocol row first, in the order startNextVersion locks, so that the two cannot deadlock
    if (!isUuid(protocolId)) throw notFound('protocol version');
    await tx.select({ id: protocols.id }).from(protocols).where(and(eq(protocols.id, protocolId), eq(protocols.laboratoryId, laboratoryId))).for('update');
    const draft = await lockDraft(tx, laboratoryId, protocolId, versionId, body.version);
    await tx.delete(protocolVersions).where(eq(protocolVersions.id, versionId));
    const [approved] = await tx
      .select({ settings: protocolVersions.settings })
      .from(protocolVersions)
      .where(eq(protocolVersions.protocolId, protocolId))
      .orderBy(desc(protocolVersions.versionNumber))
      .limit(1);
    if (approved) await tx.update(protocols).set(listColumns(approved.settings as ProtocolSettings)).where(eq(protocols.id, protocolId));
    else await tx.delete(protocols).where(eq(protocols.id, protocolId));
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actorId,
      action: 'protocol.draft_discarded',
      entityType: 'protocol_version',
      entityId: versionId,
      data: { protocolId, versionNumber: draft.versionNumber, settingsHash: settingsHash(draft.settings), protocolDeleted: !approved },
    });
    return { protocolDeleted: !approved };
  });
}

/**
 * Editing an approved protocol: starts the next version as a draft copy of the newest approved settings.
 * When the newest version is already a draft, that draft is returned (`created: false`) rather than a second one.
 *
 * @example
 * const { version, created } = await startNextVersion(user.id, lab.id, protocolId); // version.versionNumber === 2
 */
export async function startNextVersion(actorId: string, laboratoryId: string, protocolId: string) {
  if (!isUuid(protocolId)) throw notFound('protocol');
  return getDb().transaction(async (tx) => {
    // Locking the protocol row serialises two people pressing "edit" at once.
    const [protocol] = await tx
      .select({ id: protocols.id })
      .from(protocols)
      .where(and(eq(protocols.id, protocolId), eq(protocols.laboratoryId, laboratoryId)))
      .for('update');
    if (!protocol) throw notFound('protocol');
    const [latest] = await tx
      .select()
      .from(protocolVersions)
      .where(eq(protocolVersions.protocolId, protocolId))
      .orderBy(desc(protocolVersions.versionNumber))
      .limit(1);
    if (latest.status === 'draft') return { version: latest, created: false };
    const [next] = await tx
      .insert(protocolVersions)
      .values({
        protocolId,
        laboratoryId,
        versionNumber: latest.versionNumber + 1,
        status: 'draft',
        templateId: latest.templateId,
        settings: latest.settings,
        createdBy: actorId,
      })
      .returning();
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actorId,
      action: 'protocol.version_started',
      entityType: 'protocol_version',
      entityId: next.id,
      data: { protocolId, versionNumber: next.versionNumber, copiedFrom: latest.id },
    });
    return { version: next, created: true };
  });
}

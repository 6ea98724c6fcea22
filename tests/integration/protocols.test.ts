import { and, eq } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { getDb } from '../../src/server/db';
import { auditEvents, protocolVersions, ROLES } from '../../src/db/schema';
import { getApprovedVersion, listApprovedVersions } from '../../src/server/protocols';
import type { ProtocolSettings } from '../../src/lib/protocolSchema';
import { createLabWithMembers, signIn, type HttpClient, type TestLab } from './helpers';

const db = getDb();
afterAll(() => db.$client.end());

interface VersionBody {
  id: string;
  protocolId: string;
  versionNumber: number;
  status: string;
  settings: ProtocolSettings;
  version: number;
  approvedBy: string | null;
  approvedAt: string | null;
}

/** A lab scientist's protocol started from the glucose template: its ids and the first draft. */
async function glucoseDraft(client: HttpClient, lab: TestLab) {
  const created = await client.post(`/api/labs/${lab.slug}/protocols`, { templateId: 'glucose' });
  expect(created.status).toBe(201);
  const body = (await created.json()) as { protocol: { id: string }; version: VersionBody };
  const base = `/api/labs/${lab.slug}/protocols/${body.protocol.id}/versions/${body.version.id}`;
  return { protocolId: body.protocol.id, draft: body.version, base };
}

const fieldsOf = async (response: Response) => ((await response.json()) as { errors?: { field: string; message: string }[] }).errors ?? [];

describe('protocol lifecycle', () => {
  it('a draft is saved with optimistic concurrency, approved once, then frozen; editing starts version 2 as a copy', async () => {
    const lab = await createLabWithMembers('proto');
    const scientist = await signIn(lab.people.lab_scientist.email);
    const { protocolId, draft, base } = await glucoseDraft(scientist, lab);
    expect(draft).toMatchObject({ versionNumber: 1, status: 'draft', version: 1 });

    const edited = { ...draft.settings, candidateProcedure: 'Bench analyser A, reagent lot 7', comparativeProcedure: 'Core analyser B, reagent lot 3' };
    const saved = await scientist.put(base, { settings: edited, version: 1 });
    expect(saved.status).toBe(200);
    const savedBody = (await saved.json()) as { version: VersionBody; approvalErrors: unknown[] };
    expect(savedBody.version.version).toBe(2);
    expect(savedBody.approvalErrors).toEqual([]);

    // A save that started from version 1 is stale now: 409 with the current row.
    const stale = await scientist.put(base, { settings: { ...edited, title: 'Other title' }, version: 1 });
    expect(stale.status).toBe(409);
    expect(stale.headers.get('content-type')).toContain('application/problem+json');
    expect(((await stale.json()) as { current: { version: number } }).current.version).toBe(2);

    const approved = await scientist.post(`${base}/approve`, { version: 2 });
    expect(approved.status).toBe(200);
    const approvedBody = ((await approved.json()) as { version: VersionBody }).version;
    expect(approvedBody).toMatchObject({ status: 'approved', approvedBy: lab.people.lab_scientist.id });
    expect(approvedBody.approvedAt).not.toBeNull();
    expect(approvedBody.settings.candidateProcedure).toBe('Bench analyser A, reagent lot 7');

    const events = await db.select().from(auditEvents).where(and(eq(auditEvents.laboratoryId, lab.id), eq(auditEvents.entityId, draft.id)));
    expect(events.map((e) => e.action)).toEqual(['protocol.draft_saved', 'protocol.approved']);

    // Through the API an approved version cannot change, nor be approved again.
    const changeApproved = await scientist.put(base, { settings: { ...edited, title: 'Changed after approval' }, version: approvedBody.version });
    expect(changeApproved.status).toBe(409);
    expect(((await changeApproved.json()) as { detail: string }).detail).toContain('approved');
    expect((await scientist.post(`${base}/approve`, { version: approvedBody.version })).status).toBe(409);

    // Nor through SQL: the database trigger refuses a change of settings or status.
    const rawUpdate = (statement: string) => db.$client.query(statement, [draft.id]);
    await expect(rawUpdate(`update protocol_versions set settings = '{"title":"tampered"}'::jsonb where id = $1`)).rejects.toMatchObject({
      code: '23514',
      message: expect.stringMatching(/approved and cannot change/),
    });
    await expect(rawUpdate(`update protocol_versions set status = 'draft', approved_by = null, approved_at = null where id = $1`)).rejects.toMatchObject({
      message: expect.stringMatching(/approved and cannot change/),
    });
    const [stored] = await db.select().from(protocolVersions).where(eq(protocolVersions.id, draft.id));
    expect((stored.settings as ProtocolSettings).title).toBe(draft.settings.title);
    expect(stored.status).toBe('approved');

    // Editing makes version 2, a draft copy of the approved settings; asking again returns the same draft.
    const next = await scientist.post(`/api/labs/${lab.slug}/protocols/${protocolId}/versions`);
    expect(next.status).toBe(201);
    const nextVersion = ((await next.json()) as { version: VersionBody }).version;
    expect(nextVersion).toMatchObject({ versionNumber: 2, status: 'draft', settings: approvedBody.settings });
    const again = await scientist.post(`/api/labs/${lab.slug}/protocols/${protocolId}/versions`);
    expect(again.status).toBe(200);
    expect(((await again.json()) as { version: VersionBody }).version.id).toBe(nextVersion.id);

    // The trigger leaves drafts alone.
    await expect(db.$client.query(`update protocol_versions set settings = jsonb_set(settings, '{title}', '"edited in SQL"') where id = $1`, [nextVersion.id])).resolves.toMatchObject({ rowCount: 1 });

    const nextBase = `/api/labs/${lab.slug}/protocols/${protocolId}/versions/${nextVersion.id}`;
    expect((await scientist.put(nextBase, { settings: { ...nextVersion.settings, title: 'Glucose v2' }, version: nextVersion.version })).status).toBe(200);

    const list = (await (await scientist.get(`/api/labs/${lab.slug}/protocols`)).json()) as {
      protocols: { id: string; title: string; versions: { versionNumber: number; status: string; approvedByName: string | null }[] }[];
    };
    const listed = list.protocols.find((p) => p.id === protocolId)!;
    expect(listed.title).toBe('Glucose v2');
    expect(listed.versions.map((v) => [v.versionNumber, v.status, v.approvedByName])).toEqual([
      [2, 'draft', null],
      [1, 'approved', lab.people.lab_scientist.name],
    ]);

    // What studies pin: only approved versions, keeping their own title.
    const pinnable = await listApprovedVersions(lab.id);
    expect(pinnable.map((v) => [v.id, v.versionNumber, v.title, v.approvedByName])).toEqual([[draft.id, 1, draft.settings.title, lab.people.lab_scientist.name]]);
    await expect(getApprovedVersion(lab.id, draft.id)).resolves.toMatchObject({ id: draft.id, analyte: 'Glucose' });
    await expect(getApprovedVersion(lab.id, nextVersion.id)).rejects.toMatchObject({ status: 404 });
    const otherLab = await createLabWithMembers('proto-other');
    await expect(getApprovedVersion(otherLab.id, draft.id)).rejects.toMatchObject({ status: 404 });
  });
});

describe('approval refuses bad protocols with field-level errors', () => {
  const cases: [string, string, (s: ProtocolSettings) => void][] = [
    ['allowable bias of 0', 'decisionLevels.0.allowableBias.absolute', (s) => void (s.decisionLevels[0].allowableBias.absolute = 0)],
    ['negative percent allowable bias', 'decisionLevels.1.allowableBias.percent', (s) => void (s.decisionLevels[1].allowableBias.percent = -5)],
    ['decision level above the measuring interval', 'decisionLevels.2.value', (s) => void (s.decisionLevels[2].value = s.analyte.measuringInterval.high + 100)],
    ['decision level repeated', 'decisionLevels.1.value', (s) => void (s.decisionLevels[1].value = s.decisionLevels[0].value)],
  ];
  it.each(cases)('%s → 422 naming %s, and nothing approved', async (_label, field, spoil) => {
    const lab = await createLabWithMembers('badproto');
    const scientist = await signIn(lab.people.lab_scientist.email);
    const { draft, base } = await glucoseDraft(scientist, lab);
    const settings = structuredClone(draft.settings);
    spoil(settings);
    const saved = await scientist.put(base, { settings, version: 1 });
    expect(saved.status).toBe(200);
    // The autosave keeps the draft and already reports what would stop approval.
    expect(((await saved.json()) as { approvalErrors: { field: string }[] }).approvalErrors.map((e) => e.field)).toContain(field);

    const approve = await scientist.post(`${base}/approve`, { version: 2 });
    expect(approve.status).toBe(422);
    expect(approve.headers.get('content-type')).toContain('application/problem+json');
    const errors = await fieldsOf(approve);
    expect(errors.map((e) => e.field)).toContain(field);
    expect(errors.find((e) => e.field === field)!.message.length).toBeGreaterThan(10);
    const [stored] = await db.select().from(protocolVersions).where(eq(protocolVersions.id, draft.id));
    expect(stored).toMatchObject({ status: 'draft', approvedBy: null, version: 2 });
  });

  it('a blank protocol cannot be approved until it is filled in', async () => {
    const lab = await createLabWithMembers('blankproto');
    const scientist = await signIn(lab.people.lab_scientist.email);
    const created = await scientist.post(`/api/labs/${lab.slug}/protocols`, {});
    expect(created.status).toBe(201);
    const { protocol, version } = (await created.json()) as { protocol: { id: string }; version: VersionBody };
    const approve = await scientist.post(`/api/labs/${lab.slug}/protocols/${protocol.id}/versions/${version.id}/approve`, { version: 1 });
    expect(approve.status).toBe(422);
    const fields = (await fieldsOf(approve)).map((e) => e.field);
    expect(fields).toEqual(expect.arrayContaining(['title', 'analyte.name', 'decisionLevels', 'primaryEstimator.rationale']));
  });

  it('an unknown template and a malformed save body are refused with 422 naming the field', async () => {
    const lab = await createLabWithMembers('badbody');
    const scientist = await signIn(lab.people.lab_scientist.email);
    const unknown = await scientist.post(`/api/labs/${lab.slug}/protocols`, { templateId: 'no-such-analyte' });
    expect(unknown.status).toBe(422);
    expect((await fieldsOf(unknown)).map((e) => e.field)).toEqual(['templateId']);
    const { base } = await glucoseDraft(scientist, lab);
    const bad = await scientist.put(base, { settings: { title: 42 }, version: 'one' });
    expect(bad.status).toBe(422);
    expect((await fieldsOf(bad)).map((e) => e.field).sort()).toEqual(['settings.title', 'version']);
  });
});

describe('protocol permissions', () => {
  it('only lab scientists create, edit and approve; every member reads; another lab gets 404', async () => {
    const lab = await createLabWithMembers('protoperm');
    const scientist = await signIn(lab.people.lab_scientist.email);
    const { protocolId, draft, base } = await glucoseDraft(scientist, lab);
    const protocolPath = `/api/labs/${lab.slug}/protocols/${protocolId}`;

    for (const role of ROLES.filter((r) => r !== 'lab_scientist')) {
      const member = await signIn(lab.people[role].email);
      expect((await member.get(`/api/labs/${lab.slug}/protocols`)).status, `${role} lists`).toBe(200);
      expect((await member.get(protocolPath)).status, `${role} reads`).toBe(200);
      expect((await member.get(base)).status, `${role} reads the version`).toBe(200);
      expect((await member.get(`/api/labs/${lab.slug}/templates`)).status, `${role} reads templates`).toBe(200);
      expect((await member.post(`/api/labs/${lab.slug}/protocols`, { templateId: 'glucose' })).status, `${role} creates`).toBe(403);
      expect((await member.put(base, { settings: draft.settings, version: 1 })).status, `${role} saves`).toBe(403);
      expect((await member.post(`${base}/approve`, { version: 1 })).status, `${role} approves`).toBe(403);
      expect((await member.post(`${protocolPath}/versions`)).status, `${role} starts a version`).toBe(403);
      const page = await member.get(`/labs/${lab.slug}/protocols/new`);
      expect(page.status, `${role} opens the new-protocol page`).toBe(403);
    }
    // Nothing above changed the draft.
    const [stored] = await db.select().from(protocolVersions).where(eq(protocolVersions.id, draft.id));
    expect(stored.version).toBe(1);

    // The scientist's own actions are allowed.
    expect((await scientist.post(`${base}/approve`, { version: 1 })).status).toBe(200);
    expect((await scientist.post(`${protocolPath}/versions`)).status).toBe(201);

    // Another laboratory's scientist cannot see or touch the protocol: answered as missing.
    const other = await createLabWithMembers('protoother');
    const outsider = await signIn(other.people.lab_scientist.email);
    const foreignProtocol = `/api/labs/${other.slug}/protocols/${protocolId}`;
    const foreignVersion = `${foreignProtocol}/versions/${draft.id}`;
    expect((await outsider.get(foreignProtocol)).status).toBe(404);
    expect((await outsider.get(foreignVersion)).status).toBe(404);
    expect((await outsider.put(foreignVersion, { settings: draft.settings, version: 2 })).status).toBe(404);
    expect((await outsider.post(`${foreignVersion}/approve`, { version: 2 })).status).toBe(404);
    expect((await outsider.post(`${foreignProtocol}/versions`)).status).toBe(404);
    expect((await outsider.get(`/api/labs/${lab.slug}/protocols/${protocolId}`)).status).toBe(404);
    expect((await outsider.get(`/labs/${other.slug}/protocols/${protocolId}`)).status).toBe(404);
    expect((await outsider.get(`/api/labs/${other.slug}/protocols/not-a-uuid`)).status).toBe(404);
  });
});

describe('discarding a draft', () => {
  it('a next version goes back to the approved one; a never-approved protocol goes away; approved ones and stale versions are refused', async () => {
    const lab = await createLabWithMembers('proto-discard');
    const scientist = await signIn(lab.people.lab_scientist.email);
    const technician = await signIn(lab.people.technician.email);

    // Version 1 approved, version 2 started and edited, then discarded.
    const { protocolId, draft, base } = await glucoseDraft(scientist, lab);
    expect((await scientist.post(`${base}/approve`, { version: draft.version })).status).toBe(200);
    const next = ((await (await scientist.post(`/api/labs/${lab.slug}/protocols/${protocolId}/versions`)).json()) as { version: VersionBody }).version;
    const nextBase = `/api/labs/${lab.slug}/protocols/${protocolId}/versions/${next.id}`;
    const edited = await scientist.put(nextBase, { settings: { ...next.settings, title: 'Glucose, a second thought' }, version: next.version });
    const editedVersion = ((await edited.json()) as { version: VersionBody }).version.version;

    expect((await technician.delete(nextBase, { version: editedVersion })).status).toBe(403);
    const stale = await scientist.delete(nextBase, { version: next.version });
    expect(stale.status).toBe(409);
    expect((await scientist.delete(base, { version: 2 })).status).toBe(409); // approved: frozen
    const other = await createLabWithMembers('proto-discard-other');
    const outsider = await signIn(other.people.lab_scientist.email);
    expect((await outsider.delete(`/api/labs/${other.slug}/protocols/${protocolId}/versions/${next.id}`, { version: editedVersion })).status).toBe(404);

    const discarded = await scientist.delete(nextBase, { version: editedVersion });
    expect(discarded.status).toBe(200);
    expect(await discarded.json()).toEqual({ protocolDeleted: false });
    const versions = await db.select().from(protocolVersions).where(eq(protocolVersions.protocolId, protocolId));
    expect(versions.map((v) => [v.versionNumber, v.status])).toEqual([[1, 'approved']]);
    const list = (await (await scientist.get(`/api/labs/${lab.slug}/protocols`)).json()) as { protocols: { id: string; title: string }[] };
    expect(list.protocols.find((p) => p.id === protocolId)?.title).toBe(draft.settings.title); // the list shows version 1 again
    const [event] = await db.select().from(auditEvents).where(and(eq(auditEvents.laboratoryId, lab.id), eq(auditEvents.action, 'protocol.draft_discarded')));
    expect(event).toMatchObject({ entityId: next.id, actorUserId: lab.people.lab_scientist.id, data: { protocolId, versionNumber: 2, protocolDeleted: false } });

    // A protocol that never had an approved version is removed with its draft.
    const lone = await glucoseDraft(scientist, lab);
    const gone = await scientist.delete(lone.base, { version: lone.draft.version });
    expect(await gone.json()).toEqual({ protocolDeleted: true });
    expect((await scientist.get(`/api/labs/${lab.slug}/protocols/${lone.protocolId}`)).status).toBe(404);
  });
});

/**
 * Every API route × method with the access it needs and how to build a request to it, for the security matrix
 * (securityMatrix.test.ts, which fails when a route file or method under src/pages/api is missing here, or named
 * here but gone) and the bad-input corpus (badInput.test.ts). Also the per-laboratory objects the requests name,
 * so that every id in a path is a real one of that laboratory.
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join, relative } from 'node:path';
import { fileURLToPath } from 'node:url';
import { eq } from 'drizzle-orm';
import { getDb } from '../../src/server/db';
import { jobs, memberships, user } from '../../src/db/schema';
import type { Action } from '../../src/server/permissions';
import { createApiToken } from '../../src/server/laboratories';
import { uploadResults, saveRow } from '../../src/server/results';
import { openStudy, transitionStudy } from '../../src/server/studies';
import { REPORT_JOB_KIND } from '../../src/server/reportJobs';
import { createLabWithMembers, TEST_PASSWORD, type TestLab } from './helpers';
import { approvedGlucoseVersion, PROCEDURES } from './studySetup';

export type Method = 'GET' | 'POST' | 'PUT' | 'PATCH' | 'DELETE' | 'ALL';

/** Who may call a route: anyone, anyone signed in, or a member of the laboratory whose role may do `action`. */
export type Access =
  | { kind: 'public' }
  | { kind: 'signed-in' }
  /** `token`: a lab-scoped API token may call it too (results upload only). */
  | { kind: 'lab'; action: Action; token?: true };

/** The real objects of one test laboratory that the requests name. */
export interface LabObjects {
  lab: TestLab;
  protocolId: string;
  approvedVersionId: string;
  /** Collecting, with one sample of results (entered in the grid) and one API upload. */
  studyId: string;
  /** Draft, never analysed: analysis and report requests there pass the permission and then do no work. */
  draftStudyId: string;
  sampleId: string;
  /** The technician's membership (role changes are sent with an invalid body, so it never changes). */
  membershipId: string;
  /** A member nobody signs in as, whom an allowed DELETE may remove. */
  spareMembershipId: string;
  /** Lab-scoped API token used by the token checks. */
  tokenSecret: string;
  /** A second token, which an allowed DELETE may revoke. */
  spareTokenId: string;
  importLogId: string;
  reportJobId: string;
}

/** What the kind of a body field is, which decides the malformed values the bad-input corpus tries in it. */
export type FieldKind = 'string' | 'int' | 'enum' | 'uuid' | 'array' | 'object' | 'result-value';

export interface BodyField {
  /** Dotted path in the body, as the 422 `errors` name it. */
  path: string;
  kind: FieldKind;
  required?: true;
  /** How a 422 names the field when not by its path (result values are checked per sample cell). */
  reportedAs?: RegExp;
}

export interface RouteEntry {
  /** The route as its file names it under src/pages, e.g. /api/labs/[slug]/studies/[id]. */
  route: string;
  method: Method;
  /** The method sent for an ALL route. */
  sendMethod?: Exclude<Method, 'ALL'>;
  access: Access;
  /** Path parameters (the route's [names]) for a laboratory's objects. */
  params: (objects: LabObjects) => Record<string, string>;
  /** What the endpoint reads: nothing, a JSON body or a multipart form (CSV import). */
  body: 'none' | 'json' | 'multipart';
  /**
   * The body the matrix sends: one that proves the permission passed without changing anything (an empty or
   * invalid body answered 422, or a transition from the wrong state answered 409). Default `{}` for JSON routes.
   */
  probe?: (objects: LabObjects) => unknown;
  /** For the bad-input corpus: a body the schema accepts, and its fields. */
  input?: { valid: (objects: LabObjects) => Record<string, unknown>; fields: BodyField[] };
}

const row = { code: 'BI-1', comparative: ['100', '101'], candidate: ['102', '103'], runDate: '2026-11-20', flags: [], flagNote: '' };
const rowFields: BodyField[] = [
  { path: 'code', kind: 'string', required: true },
  { path: 'comparative', kind: 'array', required: true },
  { path: 'candidate', kind: 'array', required: true },
  { path: 'comparative.0', kind: 'string' },
  { path: 'runDate', kind: 'string', required: true },
  { path: 'flags', kind: 'array', required: true },
  { path: 'flagNote', kind: 'string', required: true },
  { path: 'reason', kind: 'string' },
  { path: 'version', kind: 'int' },
];
const reasonVersion: BodyField[] = [
  { path: 'reason', kind: 'string', required: true },
  { path: 'version', kind: 'int', required: true },
];
const lab = (action: Action): Access => ({ kind: 'lab', action });
const slug = (o: LabObjects) => ({ slug: o.lab.slug });
const study = (o: LabObjects) => ({ slug: o.lab.slug, id: o.studyId });

export const ROUTES: RouteEntry[] = [
  // better-auth's own endpoints answer signed-out callers (sign-in, sign-up, get-session).
  { route: '/api/auth/[...all]', method: 'ALL', sendMethod: 'GET', access: { kind: 'public' }, params: () => ({ '...all': 'get-session' }), body: 'none' },
  { route: '/api/health', method: 'GET', access: { kind: 'public' }, params: () => ({}), body: 'none' },
  // Accepting needs a signed-in person; an unknown token is a 404 for anyone signed in.
  { route: '/api/invitations/[token]/accept', method: 'POST', access: { kind: 'signed-in' }, params: () => ({ token: 'no-such-invitation-token' }), body: 'none' },

  { route: '/api/labs/[slug]/audit/verify', method: 'GET', access: lab('read'), params: slug, body: 'none' },
  {
    route: '/api/labs/[slug]/invitations',
    method: 'POST',
    access: lab('members.manage'),
    params: slug,
    body: 'json',
    input: {
      valid: () => ({ email: 'invitee@example.test', role: 'technician' }),
      fields: [
        { path: 'email', kind: 'string', required: true },
        { path: 'role', kind: 'enum', required: true },
      ],
    },
  },
  { route: '/api/labs/[slug]/members', method: 'GET', access: lab('members.manage'), params: slug, body: 'none' },
  {
    route: '/api/labs/[slug]/members/[membershipId]',
    method: 'PATCH',
    access: lab('members.manage'),
    params: (o) => ({ slug: o.lab.slug, membershipId: o.membershipId }),
    body: 'json',
    input: {
      valid: () => ({ role: 'quality', version: 99 }),
      fields: [
        { path: 'role', kind: 'enum', required: true },
        { path: 'version', kind: 'int', required: true },
      ],
    },
  },
  { route: '/api/labs/[slug]/members/[membershipId]', method: 'DELETE', access: lab('members.manage'), params: (o) => ({ slug: o.lab.slug, membershipId: o.spareMembershipId }), body: 'none' },

  { route: '/api/labs/[slug]/protocols', method: 'GET', access: lab('read'), params: slug, body: 'none' },
  {
    route: '/api/labs/[slug]/protocols',
    method: 'POST',
    access: lab('protocol.edit'),
    params: slug,
    body: 'json',
    // `{}` would start a blank protocol: an id that is not kebab-case is refused instead.
    probe: () => ({ templateId: 'Not A Template' }),
    input: { valid: () => ({ templateId: 'glucose' }), fields: [{ path: 'templateId', kind: 'enum' }] },
  },
  { route: '/api/labs/[slug]/protocols/[protocolId]', method: 'GET', access: lab('read'), params: (o) => ({ slug: o.lab.slug, protocolId: o.protocolId }), body: 'none' },
  // Starts (or returns) the next draft version: a cheap, harmless write for the allowed role.
  { route: '/api/labs/[slug]/protocols/[protocolId]/versions', method: 'POST', access: lab('protocol.edit'), params: (o) => ({ slug: o.lab.slug, protocolId: o.protocolId }), body: 'none' },
  {
    route: '/api/labs/[slug]/protocols/[protocolId]/versions/[versionId]',
    method: 'GET',
    access: lab('read'),
    params: (o) => ({ slug: o.lab.slug, protocolId: o.protocolId, versionId: o.approvedVersionId }),
    body: 'none',
  },
  {
    route: '/api/labs/[slug]/protocols/[protocolId]/versions/[versionId]',
    method: 'PUT',
    access: lab('protocol.edit'),
    params: (o) => ({ slug: o.lab.slug, protocolId: o.protocolId, versionId: o.approvedVersionId }),
    body: 'json',
    input: {
      // The approved version refuses a valid save with 409, so the corpus never writes.
      valid: () => ({ settings: { title: 'Glucose', analyte: { name: 'Glucose' } }, version: 1 }),
      fields: [
        { path: 'settings', kind: 'object', required: true },
        { path: 'settings.title', kind: 'string' },
        { path: 'settings.analyte.name', kind: 'string' },
        { path: 'version', kind: 'int', required: true },
      ],
    },
  },
  {
    route: '/api/labs/[slug]/protocols/[protocolId]/versions/[versionId]',
    method: 'DELETE',
    access: lab('protocol.edit'),
    params: (o) => ({ slug: o.lab.slug, protocolId: o.protocolId, versionId: o.approvedVersionId }),
    body: 'json',
    // The approved version refuses to be discarded with 409, so the corpus never deletes.
    input: { valid: () => ({ version: 1 }), fields: [{ path: 'version', kind: 'int', required: true }] },
  },
  {
    route: '/api/labs/[slug]/protocols/[protocolId]/versions/[versionId]/approve',
    method: 'POST',
    access: lab('protocol.approve'),
    params: (o) => ({ slug: o.lab.slug, protocolId: o.protocolId, versionId: o.approvedVersionId }),
    body: 'json',
    input: { valid: () => ({ version: 1 }), fields: [{ path: 'version', kind: 'int', required: true }] },
  },

  { route: '/api/labs/[slug]/studies', method: 'GET', access: lab('read'), params: slug, body: 'none' },
  {
    route: '/api/labs/[slug]/studies',
    method: 'POST',
    access: lab('study.open'),
    params: slug,
    body: 'json',
    input: {
      valid: (o) => ({ title: 'Bad input study', protocolVersionId: o.approvedVersionId, ...PROCEDURES, technicianIds: [o.lab.people.technician.id] }),
      fields: [
        { path: 'title', kind: 'string', required: true },
        { path: 'protocolVersionId', kind: 'uuid', required: true },
        { path: 'candidate', kind: 'object', required: true },
        { path: 'candidate.instrument', kind: 'string', required: true },
        { path: 'comparative.reagentLot', kind: 'string', required: true },
        { path: 'comparative.softwareVersion', kind: 'string', required: true },
        { path: 'technicianIds', kind: 'array', required: true },
        { path: 'technicianIds.0', kind: 'uuid' },
      ],
    },
  },
  { route: '/api/labs/[slug]/studies/[id]', method: 'GET', access: lab('read'), params: study, body: 'none' },
  {
    route: '/api/labs/[slug]/studies/[id]/amend',
    method: 'POST',
    access: lab('study.open'),
    params: study,
    body: 'json',
    input: { valid: () => ({ reason: 'Reopen for a new lot', version: 1 }), fields: reasonVersion },
  },
  { route: '/api/labs/[slug]/studies/[id]/analysis', method: 'GET', access: lab('read'), params: study, body: 'none' },
  { route: '/api/labs/[slug]/studies/[id]/analysis', method: 'POST', access: lab('analysis.run'), params: (o) => ({ slug: o.lab.slug, id: o.draftStudyId }), body: 'none' },
  {
    route: '/api/labs/[slug]/studies/[id]/analysis/samples/[sampleId]',
    method: 'GET',
    access: lab('read'),
    params: (o) => ({ slug: o.lab.slug, id: o.studyId, sampleId: o.sampleId }),
    body: 'none',
  },
  { route: '/api/labs/[slug]/studies/[id]/coverage', method: 'GET', access: lab('read'), params: study, body: 'none' },
  { route: '/api/labs/[slug]/studies/[id]/dossier', method: 'GET', access: lab('dossier.export'), params: study, body: 'none' },
  // The matrix's JSON probe is answered 415 once the permission passed; the corpus is in badInput.test.ts.
  { route: '/api/labs/[slug]/studies/[id]/imports', method: 'POST', access: lab('results.enter'), params: study, body: 'multipart' },
  {
    route: '/api/labs/[slug]/studies/[id]/imports/[logId]',
    method: 'GET',
    access: lab('read'),
    params: (o) => ({ slug: o.lab.slug, id: o.studyId, logId: o.importLogId }),
    body: 'none',
  },
  { route: '/api/labs/[slug]/studies/[id]/report', method: 'GET', access: lab('read'), params: study, body: 'none' },
  // The draft study has no analysis, so an allowed request is a 409 and no PDF is rendered.
  { route: '/api/labs/[slug]/studies/[id]/report', method: 'POST', access: lab('dossier.export'), params: (o) => ({ slug: o.lab.slug, id: o.draftStudyId }), body: 'none' },
  {
    route: '/api/labs/[slug]/studies/[id]/report/jobs/[jobId]',
    method: 'GET',
    access: lab('read'),
    params: (o) => ({ slug: o.lab.slug, id: o.studyId, jobId: o.reportJobId }),
    body: 'none',
  },
  {
    route: '/api/labs/[slug]/studies/[id]/results',
    method: 'POST',
    access: { kind: 'lab', action: 'results.enter', token: true },
    params: study,
    body: 'json',
    input: {
      valid: () => ({ results: [{ sampleCode: 'BI-API', procedure: 'comparative', replicate: 1, value: 120, unit: 'mg/dL', runDate: '2026-11-20' }] }),
      fields: [
        { path: 'results', kind: 'array', required: true },
        { path: 'results.0.sampleCode', kind: 'string', required: true },
        { path: 'results.0.procedure', kind: 'enum', required: true },
        { path: 'results.0.replicate', kind: 'int', required: true },
        { path: 'results.0.value', kind: 'result-value', required: true, reportedAs: /^(results\.0\.value|sample BI-API\.comparative\.1)$/ },
        { path: 'results.0.unit', kind: 'string', required: true },
        { path: 'results.0.runDate', kind: 'string' },
        { path: 'existing', kind: 'enum' },
      ],
    },
  },
  {
    route: '/api/labs/[slug]/studies/[id]/return',
    method: 'POST',
    access: lab('study.sign'),
    params: study,
    body: 'json',
    input: { valid: () => ({ reason: 'Add samples above 300 mg/dL', version: 1 }), fields: reasonVersion },
  },
  { route: '/api/labs/[slug]/studies/[id]/samples', method: 'GET', access: lab('read'), params: study, body: 'none' },
  {
    route: '/api/labs/[slug]/studies/[id]/samples',
    method: 'POST',
    access: lab('results.enter'),
    params: study,
    body: 'json',
    // BI-1 is the sample the fixture already saved, so a valid body is refused as a duplicate code.
    input: { valid: () => ({ ...row }), fields: rowFields },
  },
  {
    route: '/api/labs/[slug]/studies/[id]/samples/[sampleId]',
    method: 'PUT',
    access: lab('results.enter'),
    params: (o) => ({ slug: o.lab.slug, id: o.studyId, sampleId: o.sampleId }),
    body: 'json',
    // The same values as saved, from a stale version: refused with 409.
    input: { valid: () => ({ ...row, version: 99 }), fields: rowFields },
  },
  {
    route: '/api/labs/[slug]/studies/[id]/samples/[sampleId]',
    method: 'DELETE',
    access: lab('results.enter'),
    params: (o) => ({ slug: o.lab.slug, id: o.studyId, sampleId: o.sampleId }),
    body: 'json',
    // From a stale version: refused with 409, so the sample stays for the other requests.
    input: {
      valid: () => ({ version: 99, reason: 'Entered under the wrong study' }),
      fields: [
        { path: 'version', kind: 'int', required: true },
        { path: 'reason', kind: 'string', required: true },
      ],
    },
  },
  {
    route: '/api/labs/[slug]/studies/[id]/samples/[sampleId]/exclusion',
    method: 'POST',
    access: lab('sample.exclude'),
    params: (o) => ({ slug: o.lab.slug, id: o.studyId, sampleId: o.sampleId }),
    body: 'json',
    input: { valid: () => ({ reason: 'Haemolysed' }), fields: [{ path: 'reason', kind: 'string', required: true }] },
  },
  {
    route: '/api/labs/[slug]/studies/[id]/samples/[sampleId]/exclusion',
    method: 'DELETE',
    access: lab('sample.exclude'),
    params: (o) => ({ slug: o.lab.slug, id: o.studyId, sampleId: o.sampleId }),
    body: 'json',
    input: { valid: () => ({ reason: 'Not haemolysed after all' }), fields: [{ path: 'reason', kind: 'string', required: true }] },
  },
  {
    route: '/api/labs/[slug]/studies/[id]/sign',
    method: 'POST',
    access: lab('study.sign'),
    params: study,
    body: 'json',
    input: {
      valid: () => ({ verdict: 'rejected', comment: 'Bias too large', password: TEST_PASSWORD, version: 1, analysisRunId: crypto.randomUUID() }),
      fields: [
        { path: 'verdict', kind: 'enum', required: true },
        { path: 'comment', kind: 'string' },
        { path: 'password', kind: 'string', required: true },
        { path: 'version', kind: 'int', required: true },
        { path: 'analysisRunId', kind: 'uuid', required: true },
      ],
    },
  },
  {
    route: '/api/labs/[slug]/studies/[id]/submit',
    method: 'POST',
    access: lab('study.submit'),
    params: study,
    body: 'json',
    input: { valid: () => ({ version: 1 }), fields: [{ path: 'version', kind: 'int', required: true }] },
  },
  {
    route: '/api/labs/[slug]/studies/[id]/transitions',
    method: 'POST',
    // The endpoint lets every member through and the service checks the transition's own action.
    access: lab('study.open'),
    params: study,
    body: 'json',
    // A valid transition, so the role check is reached; the study is collecting, so the allowed role gets 409.
    probe: () => ({ transition: 'start_collecting', version: 1 }),
    input: {
      valid: () => ({ transition: 'start_collecting', version: 1 }),
      fields: [
        { path: 'transition', kind: 'enum', required: true },
        { path: 'version', kind: 'int', required: true },
      ],
    },
  },
  { route: '/api/labs/[slug]/templates', method: 'GET', access: lab('read'), params: slug, body: 'none' },
  { route: '/api/labs/[slug]/tokens', method: 'GET', access: lab('tokens.manage'), params: slug, body: 'none' },
  {
    route: '/api/labs/[slug]/tokens',
    method: 'POST',
    access: lab('tokens.manage'),
    params: slug,
    body: 'json',
    input: { valid: () => ({ name: 'LIS bridge' }), fields: [{ path: 'name', kind: 'string', required: true }] },
  },
  { route: '/api/labs/[slug]/tokens/[tokenId]', method: 'DELETE', access: lab('tokens.manage'), params: (o) => ({ slug: o.lab.slug, tokenId: o.spareTokenId }), body: 'none' },
];

/** The path of a route with its [parameters] filled in (each encoded as one path segment, except [...rest]). */
export function pathOf(route: string, params: Record<string, string>): string {
  return route.replace(/\[([^\]]+)\]/g, (_, name: string) => {
    const value = params[name];
    if (value === undefined) throw new Error(`no value for [${name}] in ${route}`);
    return name.startsWith('...') ? value : encodeURIComponent(value);
  });
}

const API_DIR = fileURLToPath(new URL('../../src/pages/api', import.meta.url));
const METHOD_EXPORT = /export\s+(?:const|async\s+function|function)\s+(GET|POST|PUT|PATCH|DELETE|ALL)\b/g;

/** Every route × exported method under src/pages/api, read from the files, as "METHOD /route". */
export function discoverRoutes(): string[] {
  const found: string[] = [];
  const walk = (dir: string) => {
    for (const entry of readdirSync(dir, { withFileTypes: true })) {
      const file = join(dir, entry.name);
      if (entry.isDirectory()) walk(file);
      else if (/\.(ts|js)$/.test(entry.name)) {
        const route = `/api/${relative(API_DIR, file).replace(/\\/g, '/').replace(/\.(ts|js)$/, '').replace(/(^|\/)index$/, '')}`.replace(/\/$/, '');
        for (const match of readFileSync(file, 'utf8').matchAll(METHOD_EXPORT)) found.push(`${match[1]} ${route}`);
      }
    }
  };
  walk(API_DIR);
  return found.sort();
}

/**
 * A laboratory with one member per role and the objects the routes name, made through the services (not the
 * HTTP API, which is what the tests examine).
 */
export async function createLabObjects(label: string): Promise<LabObjects> {
  const testLab = await createLabWithMembers(label);
  const db = getDb();
  const { version } = await approvedGlucoseVersion(testLab);
  const scientist = testLab.people.lab_scientist.id;
  const technicianId = testLab.people.technician.id;
  const opening = { title: 'Matrix study', protocolVersionId: version.id, ...PROCEDURES, technicianIds: [technicianId] };
  const opened = await openStudy(scientist, testLab.id, opening);
  const collecting = await transitionStudy({ id: scientist, role: 'lab_scientist' }, testLab.id, opened.id, 'start_collecting', opened.version);
  const draft = await openStudy(scientist, testLab.id, { ...opening, title: 'Matrix draft study' });
  const saved = await saveRow({ userId: technicianId, tokenName: null }, testLab.id, collecting.id, null, { ...row, flags: [] });
  const uploaded = await uploadResults({ userId: null, tokenName: 'Matrix LIS' }, testLab.id, collecting.id, {
    results: [{ sampleCode: 'API-1', procedure: 'comparative', replicate: 1, value: 110, unit: 'mg/dL' }],
    existing: 'refuse',
  });
  const token = await createApiToken(testLab.people.lab_admin.id, testLab.id, 'Matrix LIS');
  const spareToken = await createApiToken(testLab.people.lab_admin.id, testLab.id, 'Spare');

  const spareUserId = crypto.randomUUID();
  await db.insert(user).values({ id: spareUserId, name: `spare ${label}`, email: `spare-${spareUserId.slice(0, 8)}@${label}.test`, emailVerified: true });
  const [spare] = await db.insert(memberships).values({ laboratoryId: testLab.id, userId: spareUserId, role: 'quality' }).returning();
  const [technicianMembership] = await db.select().from(memberships).where(eq(memberships.userId, technicianId));
  // A finished-with-error report job row, so the polling route has a real id (no worker picks it up).
  const [job] = await db
    .insert(jobs)
    .values({ laboratoryId: testLab.id, studyId: collecting.id, kind: REPORT_JOB_KIND, status: 'failed', error: 'fixture', createdBy: scientist })
    .returning();

  return {
    lab: testLab,
    protocolId: version.protocolId,
    approvedVersionId: version.id,
    studyId: collecting.id,
    draftStudyId: draft.id,
    sampleId: saved.row.id,
    membershipId: technicianMembership.id,
    spareMembershipId: spare.id,
    tokenSecret: token.secret,
    spareTokenId: spareToken.id,
    importLogId: uploaded.importLogId,
    reportJobId: job.id,
  };
}

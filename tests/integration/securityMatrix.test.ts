/**
 * The security matrix: every API route × method (discovered from src/pages/api, checked against routeTable.ts)
 * × signed out / every role in its own laboratory / every role in another laboratory / a lab-scoped API token,
 * with the expected status derived from the permission table (src/server/permissions.ts). Session fixation,
 * stale sessions after sign-out and cross-site form posts are in security.test.ts; here every write route is
 * also sent cross-origin.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ROLES, type Role } from '../../src/db/schema';
import { getDb } from '../../src/server/db';
import { can } from '../../src/server/permissions';
import { dbFingerprint } from './dbFingerprint';
import { httpClient, signIn, type HttpClient } from './helpers';
import { createLabObjects, discoverRoutes, pathOf, ROUTES, type LabObjects, type RouteEntry } from './routeTable';

afterAll(() => getDb().$client.end());

let own: LabObjects;
let other: LabObjects;
const members = {} as Record<Role, HttpClient>;

beforeAll(async () => {
  [own, other] = await Promise.all([createLabObjects('matrix-own'), createLabObjects('matrix-other')]);
  await Promise.all(
    ROLES.map(async (role) => {
      members[role] = await signIn(own.lab.people[role].email);
    }),
  );
});

const labRoutes = ROUTES.filter((entry) => entry.access.kind === 'lab');
const writeRoutes = labRoutes.filter((entry) => entry.method !== 'GET');
const label = (entry: RouteEntry) => `${entry.method} ${entry.route}`;

interface Answer {
  status: number;
  type: string;
}

/** Sends a route's matrix request for a laboratory's objects; the body is always read (sockets are reused). */
async function send(entry: RouteEntry, objects: LabObjects, client: HttpClient = httpClient(), headers: Record<string, string> = {}): Promise<Answer> {
  const method = entry.sendMethod ?? entry.method;
  const body = entry.body === 'none' ? undefined : (entry.probe?.(objects) ?? {});
  const response = await client.request(method, pathOf(entry.route, entry.params(objects)), body, headers);
  await response.arrayBuffer();
  return { status: response.status, type: response.headers.get('content-type') ?? '' };
}

/** "METHOD route: got 200, expected 403" for each answer that is not the expected one. */
async function mismatches(entries: RouteEntry[], request: (entry: RouteEntry) => Promise<Answer>, expected: (entry: RouteEntry) => (answer: Answer) => string | null) {
  const found: string[] = [];
  for (const entry of entries) {
    const answer = await request(entry);
    const problem = expected(entry)(answer);
    if (problem) found.push(`${label(entry)}: got ${answer.status}, expected ${problem}`);
  }
  return found;
}

/** An exact status, answered as problem+json. */
const exactly = (status: number) => (answer: Answer) =>
  answer.status === status && answer.type.includes('application/problem+json') ? null : `${status} problem+json (type ${answer.type || 'none'})`;
/**
 * The access check passed: anything but 401/403, and no server error. A 404 must be the app's problem+json (a
 * missing object), not the router's page for a path that matches no route.
 */
const granted = (answer: Answer) =>
  answer.status === 401 || answer.status === 403 || answer.status >= 500 || (answer.status === 404 && !answer.type.includes('application/problem+json'))
    ? 'not 401/403/5xx, and a 404 only as problem+json'
    : null;
/** Refused, as Astro's own origin check (plain text, for bodiless and form posts) or the middleware (problem+json) answers. */
const refusedCrossSite = (answer: Answer) => (answer.status === 403 ? null : '403');

describe('the route table', () => {
  it('names every route and exported method under src/pages/api, and no route that is gone', () => {
    const tabled = ROUTES.map(label).sort();
    const discovered = discoverRoutes();
    expect(discovered.filter((route) => !tabled.includes(route)), 'routes missing from routeTable.ts').toEqual([]);
    expect(tabled.filter((route) => !discovered.includes(route)), 'routes in routeTable.ts that no longer exist').toEqual([]);
    expect(new Set(tabled).size, 'a route × method listed twice').toBe(tabled.length);
  });
});

describe('signed out', () => {
  it('every laboratory and signed-in route answers 401; public routes answer', async () => {
    const before = await dbFingerprint();
    const found = await mismatches(ROUTES, (entry) => send(entry, own), (entry) => (entry.access.kind === 'public' ? granted : exactly(401)));
    expect(found).toEqual([]);
    expect(await dbFingerprint()).toEqual(before);
  });
});

describe.each(ROLES)('%s', (role) => {
  it('in its own laboratory: refused (403, nothing written) unless the permission table allows the route', async () => {
    const client = members[role];
    const allowed = (entry: RouteEntry) => entry.access.kind !== 'lab' || can(role, entry.access.action);
    const before = await dbFingerprint();
    const refused = await mismatches(
      ROUTES.filter((entry) => !allowed(entry)),
      (entry) => send(entry, own, client),
      () => exactly(403),
    );
    expect(refused).toEqual([]);
    expect(await dbFingerprint(), 'a refused request changed the database').toEqual(before);
    const passed = await mismatches(ROUTES.filter(allowed), (entry) => send(entry, own, client), () => granted);
    expect(passed).toEqual([]);
  });

  it("in another laboratory, with that laboratory's real ids: 404 for every laboratory route, nothing written", async () => {
    const client = members[role];
    const before = await dbFingerprint();
    const found = await mismatches(labRoutes, (entry) => send(entry, other, client), () => exactly(404));
    expect(found).toEqual([]);
    expect(await dbFingerprint()).toEqual(before);
  });
});

describe('lab-scoped API tokens', () => {
  const bearer = () => ({ authorization: `Bearer ${own.tokenSecret}` });

  it("a token on another laboratory's routes is answered 404, and nothing is written", async () => {
    const before = await dbFingerprint();
    const found = await mismatches(labRoutes, (entry) => send(entry, other, httpClient(), bearer()), () => exactly(404));
    expect(found).toEqual([]);
    expect(await dbFingerprint()).toEqual(before);
  });

  it('a token is refused (403) on every route of its own laboratory except the results upload', async () => {
    const before = await dbFingerprint();
    const found = await mismatches(
      labRoutes,
      (entry) => send(entry, own, httpClient(), bearer()),
      (entry) => (entry.access.kind === 'lab' && entry.access.token ? granted : exactly(403)),
    );
    expect(found).toEqual([]);
    expect(await dbFingerprint()).toEqual(before);
  });

  it('an unknown token is answered 401 on a laboratory route', async () => {
    const results = labRoutes.filter((entry) => entry.access.kind === 'lab' && entry.access.token);
    expect(results.length).toBeGreaterThan(0);
    const found = await mismatches(results, (entry) => send(entry, own, httpClient(), { authorization: 'Bearer bw_not-a-real-token' }), () => exactly(401));
    expect(found).toEqual([]);
  });
});

describe('cross-origin writes', () => {
  it('every write route refuses a request from another origin carrying an allowed member’s cookie (403, nothing written)', async () => {
    const allowedMember = (entry: RouteEntry) => {
      const action = entry.access.kind === 'lab' ? entry.access.action : 'read';
      const role = ROLES.find((r) => can(r, action));
      if (!role) throw new Error(`no role may ${action}`);
      return members[role];
    };
    const before = await dbFingerprint();
    const found = await mismatches(
      [...writeRoutes, ...ROUTES.filter((entry) => entry.access.kind === 'signed-in')],
      (entry) => send(entry, own, allowedMember(entry), { origin: 'http://evil.example' }),
      () => refusedCrossSite,
    );
    expect(found).toEqual([]);
    expect(await dbFingerprint()).toEqual(before);
  });
});

/**
 * Bad input: every write endpoint under /api/labs (from routeTable.ts) gets a corpus of malformed bodies — not
 * JSON, the wrong media type, too large, the wrong shape, each field missing, of the wrong type, a huge or
 * non-finite number, a very long string or a Unicode edge case — and malformed ids in its path. Each must be a 4xx
 * problem+json with a clear detail (and, for 422, `errors` naming the field), never a 500, and the database
 * fingerprint must be the same before and after. CSV imports (multipart) get an oversized and a malformed upload
 * here; their content is tested in imports.test.ts.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ROLES, type Role } from '../../src/db/schema';
import { getDb } from '../../src/server/db';
import { can } from '../../src/server/permissions';
import { IMPORT_LIMITS } from '../../src/lib/resultSchemas';
import { dbFingerprint } from './dbFingerprint';
import { signIn, type HttpClient } from './helpers';
import { createLabObjects, pathOf, ROUTES, type BodyField, type LabObjects, type RouteEntry } from './routeTable';

afterAll(() => getDb().$client.end());

let objects: LabObjects;
const members = {} as Record<Role, HttpClient>;

beforeAll(async () => {
  objects = await createLabObjects('bad-input');
  await Promise.all(
    ROLES.map(async (role) => {
      members[role] = await signIn(objects.lab.people[role].email);
    }),
  );
});

const writeRoutes = ROUTES.filter((entry) => entry.access.kind === 'lab' && entry.method !== 'GET');
const jsonRoutes = writeRoutes.filter((entry) => entry.body === 'json');
const label = (entry: RouteEntry) => `${entry.method} ${entry.route}`;

/** A member whose role may call the route, so that only the input can be refused. */
function allowedMember(entry: RouteEntry): HttpClient {
  if (entry.access.kind !== 'lab') throw new Error(`${label(entry)} is not a laboratory route`);
  const action = entry.access.action;
  const role = ROLES.find((r) => can(r, action));
  if (!role) throw new Error(`no role may ${action}`);
  return members[role];
}

interface Case {
  name: string;
  /** The raw body text and its media type. */
  text: string;
  type?: string;
  /** Status (or statuses) allowed, and for 422 the field the errors must name. */
  expected: { status: number | number[]; field?: string | RegExp };
}

const LONG = 'x'.repeat(100_000);
const TOO_LARGE_BYTES = IMPORT_LIMITS.bytes + 1024 * 1024;
/** Number tokens JSON.stringify cannot write (1e309 is beyond a double and parses to Infinity). */
const RAW_NUMBERS = { huge: '1e308', overflow: '1e309', negativeOverflow: '-1e309' } as const;
const rawMarker = (token: string) => `__raw_number_${token}__`;
const serialize = (body: unknown) => JSON.stringify(body).replace(/"__raw_number_([^_]+)__"/g, (_, token: string) => token);

const STRING_VALUES: [string, unknown][] = [
  ['100 000 characters', LONG],
  ['a NUL character', 'ab\u0000cd'],
  ['a lone surrogate', 'ab\ud800cd'],
  ['a right-to-left override', 'ab\u202edc'],
  ['only a zero-width joiner', '\u200d'],
  ['a number', 12345],
  ['null', null],
];
const NUMBER_VALUES: [string, unknown][] = [
  ['1e308 (as JSON text)', rawMarker(RAW_NUMBERS.huge)],
  ['1e309 (as JSON text)', rawMarker(RAW_NUMBERS.overflow)],
  ['-1e309 (as JSON text)', rawMarker(RAW_NUMBERS.negativeOverflow)],
  ['"NaN"', 'NaN'],
  ['"Infinity"', 'Infinity'],
  ['"-Infinity"', '-Infinity'],
  ['a fraction', 1.5],
  ['zero', 0],
  ['a numeric string', '1'],
  ['null', null],
];
const RESULT_VALUES: [string, unknown][] = [
  ['1e309 (as JSON text)', rawMarker(RAW_NUMBERS.overflow)],
  ['-1e309 (as JSON text)', rawMarker(RAW_NUMBERS.negativeOverflow)],
  ['"NaN"', 'NaN'],
  ['"Infinity"', 'Infinity'],
  ['"-Infinity"', '-Infinity'],
  ['100 000 characters', LONG],
  ['a NUL character', '12\u0000'],
  ['a lone surrogate', '12\ud800'],
  ['only a zero-width joiner', '\u200d'],
  ['an object', { value: 12 }],
  ['null', null],
];
const VALUES_BY_KIND: Record<BodyField['kind'], [string, unknown][]> = {
  string: STRING_VALUES,
  enum: [['an unknown value', 'no-such-value'], ...STRING_VALUES],
  uuid: [['not an id', 'not-an-id'], ...STRING_VALUES],
  int: NUMBER_VALUES,
  'result-value': RESULT_VALUES,
  array: [['a string', 'x'], ['an object', { 0: 'x' }], ['null', null], ['100 001 items', Array.from({ length: 100_001 }, () => 'x')]],
  object: [['a string', 'x'], ['an array', []], ['null', null]],
};

const MISSING = Symbol('missing');

/** A copy of the body with the field at a dotted path set to a value, or removed. */
function withField(body: Record<string, unknown>, path: string, value: unknown): Record<string, unknown> {
  const copy = structuredClone(body);
  const keys = path.split('.');
  let target = copy as Record<string, unknown>;
  for (const key of keys.slice(0, -1)) target = target[key] as Record<string, unknown>;
  const last = keys[keys.length - 1];
  if (value === MISSING) delete target[last];
  else target[last] = value;
  return copy;
}

/** The corpus for one JSON endpoint. */
function corpusFor(entry: RouteEntry): Case[] {
  const json = 'application/json';
  const valid = entry.input!.valid(objects);
  const cases: Case[] = [
    { name: 'an empty body', text: '', type: json, expected: { status: 400 } },
    { name: 'a body that is not JSON', text: '{"version": 1,', type: json, expected: { status: 400 } },
    { name: 'the valid body as text/plain', text: JSON.stringify(valid), type: 'text/plain', expected: { status: 415 } },
    { name: 'the valid body as a form', text: 'version=1', type: 'application/x-www-form-urlencoded', expected: { status: 415 } },
    { name: 'a 6 MB JSON body', text: JSON.stringify({ ...valid, padding: 'x'.repeat(TOO_LARGE_BYTES) }), type: json, expected: { status: 413 } },
    { name: 'JSON null', text: 'null', type: json, expected: { status: 422, field: '(body)' } },
    { name: 'a JSON array', text: '[]', type: json, expected: { status: 422, field: '(body)' } },
    { name: 'a JSON string', text: '"text"', type: json, expected: { status: 422, field: '(body)' } },
    { name: 'a JSON number', text: '1e309', type: json, expected: { status: 422, field: '(body)' } },
    { name: 'arrays nested 200 000 deep', text: `${'['.repeat(200_000)}${']'.repeat(200_000)}`, type: json, expected: { status: [400, 422] } },
  ];
  // Unknown keys are dropped by the schemas, so the deep object goes in a known field that is not an object.
  const deepField = entry.input!.fields.find((field) => field.kind !== 'object')!;
  const deepObject = `${'{"a":'.repeat(100_000)}"x"${'}'.repeat(100_000)}`;
  cases.push({
    name: `${deepField.path} as objects nested 100 000 deep`,
    text: serialize(withField(valid, deepField.path, '__deep__')).replace('"__deep__"', deepObject),
    type: json,
    expected: { status: [400, 422], field: deepField.reportedAs ?? deepField.path },
  });
  for (const field of entry.input!.fields) {
    const named = field.reportedAs ?? field.path;
    if (field.required) cases.push({ name: `${field.path} missing`, text: serialize(withField(valid, field.path, MISSING)), type: json, expected: { status: 422, field: named } });
    // An id field may take any string in its schema and be answered 404 when it names nothing in the laboratory.
    const status = field.kind === 'uuid' ? [422, 404] : 422;
    for (const [what, value] of VALUES_BY_KIND[field.kind]) {
      cases.push({ name: `${field.path} as ${what}`, text: serialize(withField(valid, field.path, value)), type: json, expected: { status, field: named } });
    }
  }
  return cases;
}

interface Problem {
  status: number;
  detail?: unknown;
  errors?: { field: string; message: string }[];
}

/** What is wrong with an answer to a bad request, or null when it is a clear 4xx problem+json as expected. */
async function judge(response: Response, expected: Case['expected']): Promise<string | null> {
  const type = response.headers.get('content-type') ?? '';
  const text = await response.text();
  if (!type.includes('application/problem+json')) return `${response.status} ${type}: ${text.slice(0, 120)}`;
  const problem = JSON.parse(text) as Problem;
  const statuses = Array.isArray(expected.status) ? expected.status : [expected.status];
  if (!statuses.includes(response.status)) return `${response.status} (expected ${expected.status}): ${String(problem.detail).slice(0, 160)}`;
  if (typeof problem.detail !== 'string' || problem.detail.trim().length < 10) return `no clear detail: ${JSON.stringify(problem.detail)}`;
  if (response.status === 422 && expected.field !== undefined) {
    const fields = (problem.errors ?? []).map((e) => e.field);
    const named = fields.some((f) => (typeof expected.field === 'string' ? f === expected.field || f.startsWith(`${expected.field}.`) : expected.field!.test(f)));
    if (!named) return `422 without an error for ${String(expected.field)} (errors: ${fields.join(', ') || 'none'})`;
    if ((problem.errors ?? []).some((e) => !e.message)) return '422 with an error without a message';
  }
  return null;
}

describe.each(jsonRoutes.map((entry) => [label(entry), entry] as const))('%s', (_name, entry) => {
  it('refuses every malformed body with a 4xx problem+json naming what is wrong, and writes nothing', async () => {
    const client = allowedMember(entry);
    const path = pathOf(entry.route, entry.params(objects));
    const cases = corpusFor(entry);
    expect(cases.length).toBeGreaterThan(10);
    const before = await dbFingerprint();
    const wrong: string[] = [];
    for (const c of cases) {
      const response = await client.request(entry.method, path, c.text, c.type ? { 'content-type': c.type } : {});
      const verdict = await judge(response, c.expected);
      if (verdict) wrong.push(`${c.name}: ${verdict}`);
    }
    expect(wrong).toEqual([]);
    expect(await dbFingerprint()).toEqual(before);
  });
});

const MALFORMED_IDS: [string, string][] = [
  ['not a uuid', 'not-a-uuid'],
  ['a uuid with a bad digit', '0000000g-0000-4000-8000-000000000000'],
  ['SQL text', "1'or'1'='1"],
  ['a NUL character', 'a\u0000b'],
  ['a right-to-left override', 'a\u202eb'],
  ['5000 characters', 'x'.repeat(5000)],
];

describe('malformed ids in the path of every write route', () => {
  it('answer 404 problem+json and write nothing', async () => {
    const withIds = writeRoutes.filter((entry) => Object.keys(entry.params(objects)).some((name) => name !== 'slug'));
    expect(withIds.length).toBeGreaterThan(10);
    const before = await dbFingerprint();
    const wrong: string[] = [];
    for (const entry of withIds) {
      const params = entry.params(objects);
      const body = entry.body === 'json' ? JSON.stringify(entry.input!.valid(objects)) : undefined;
      for (const name of Object.keys(params).filter((n) => n !== 'slug')) {
        for (const [what, id] of MALFORMED_IDS) {
          const response = await allowedMember(entry).request(entry.method, pathOf(entry.route, { ...params, [name]: id }), body, body ? { 'content-type': 'application/json' } : {});
          // A multipart route refuses the missing form first (415); the id is checked after the upload is read.
          const verdict = await judge(response, { status: entry.body === 'multipart' ? 415 : 404 });
          if (verdict) wrong.push(`${label(entry)} with [${name}] ${what}: ${verdict}`);
        }
      }
    }
    expect(wrong).toEqual([]);
    expect(await dbFingerprint()).toEqual(before);
  });
});

describe('CSV import uploads', () => {
  const importsPath = () => `/api/labs/${objects.lab.slug}/studies/${objects.studyId}/imports`;
  const settings = JSON.stringify({ mapping: { sampleCode: 'Sample', comparative: ['Comparative 1', 'Comparative 2'], candidate: ['Candidate 1', 'Candidate 2'] } });
  const form = (file: Blob | null, settingsText: string | null) => {
    const data = new FormData();
    if (file) data.set('file', file, 'upload.csv');
    if (settingsText !== null) data.set('settings', settingsText);
    return data;
  };
  const goodCsv = () => new Blob(['Sample,Comparative 1,Comparative 2,Candidate 1,Candidate 2\nCSV-1,100,101,102,103\n'], { type: 'text/csv' });

  it.each<[string, () => { body: BodyInit; type?: string }, number, string?]>([
    ['a file larger than the limit', () => ({ body: form(new Blob([`Sample,Comparative 1\n${'C-1,100\n'.repeat(Math.ceil(TOO_LARGE_BYTES / 8))}`], { type: 'text/csv' }), settings) }), 413],
    ['a JSON body instead of a form', () => ({ body: settings, type: 'application/json' }), 415],
    ['a form without the file', () => ({ body: form(null, settings) }), 422, 'file'],
    ['settings that are not JSON', () => ({ body: form(goodCsv(), '{mapping') }), 422, 'settings'],
    ['settings with a NUL in a column name', () => ({ body: form(goodCsv(), settings.replace('Sample', 'Sam\\u0000ple')) }), 422, 'mapping.sampleCode'],
    ['a file with a NUL in a sample code', () => ({ body: form(new Blob(['Sample,Comparative 1,Comparative 2,Candidate 1,Candidate 2\nCSV\u0000-1,100,101,102,103\n'], { type: 'text/csv' }), settings) }), 422],
    ['a file that is not UTF-8 text', () => ({ body: form(new Blob([new Uint8Array([0xff, 0xfe, 0x00, 0xd8, 0x41, 0x00, 0x0a, 0x00])], { type: 'text/csv' }), settings) }), 422],
    ['a multipart type with a body that is not a form', () => ({ body: 'this is not a multipart body', type: 'multipart/form-data; boundary=xyz' }), 400],
    ['a multipart type without a boundary', () => ({ body: '--xyz\r\n\r\n', type: 'multipart/form-data' }), 400],
  ])('refuses %s with a 4xx problem+json and writes nothing', async (_what, make, status, field) => {
    const { body, type } = make();
    const before = await dbFingerprint();
    const response = await members.technician.request('POST', importsPath(), body, type ? { 'content-type': type } : {});
    expect(await judge(response, { status, field })).toBeNull();
    expect(await dbFingerprint()).toEqual(before);
  });
});

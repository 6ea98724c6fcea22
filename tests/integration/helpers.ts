/**
 * Helpers for integration tests: laboratories with one member per role, signed-in HTTP clients against the
 * built server (real cookies, real better-auth), and the captured mail.
 */
import { hashPassword } from 'better-auth/crypto';
import { getDb } from '../../src/server/db';
import { account, laboratories, memberships, user, ROLES, type Role } from '../../src/db/schema';
import { readCapturedMail } from '../../src/server/mailbox';

export const BASE_URL = () => {
  const url = process.env.TEST_BASE_URL;
  if (!url) throw new Error('TEST_BASE_URL is not set: run the integration project (its global setup starts the server).');
  return url;
};

export const TEST_PASSWORD = 'integration-pass-42';
let passwordHash: Promise<string> | undefined;

export interface TestLab {
  id: string;
  slug: string;
  name: string;
  people: Record<Role, { id: string; email: string; name: string }>;
}

/** A laboratory with one verified member per role, all with TEST_PASSWORD. */
export async function createLabWithMembers(label = 'lab'): Promise<TestLab> {
  passwordHash ??= hashPassword(TEST_PASSWORD);
  const hash = await passwordHash;
  const suffix = crypto.randomUUID().slice(0, 8);
  const db = getDb();
  const [lab] = await db.insert(laboratories).values({ name: `Test ${label} ${suffix}`, slug: `${label}-${suffix}` }).returning();
  const people = {} as TestLab['people'];
  for (const role of ROLES) {
    const id = crypto.randomUUID();
    const email = `${role}-${suffix}@${label}.test`;
    const name = `${role} ${suffix}`;
    await db.insert(user).values({ id, name, email, emailVerified: true });
    await db.insert(account).values({ id: crypto.randomUUID(), accountId: id, providerId: 'credential', userId: id, password: hash });
    await db.insert(memberships).values({ laboratoryId: lab.id, userId: id, role });
    people[role] = { id, email, name };
  }
  return { id: lab.id, slug: lab.slug, name: lab.name, people };
}

export interface HttpClient {
  request(method: string, path: string, body?: unknown, headers?: Record<string, string>): Promise<Response>;
  get(path: string): Promise<Response>;
  post(path: string, body?: unknown): Promise<Response>;
  patch(path: string, body?: unknown): Promise<Response>;
  put(path: string, body?: unknown): Promise<Response>;
  delete(path: string): Promise<Response>;
  cookie: string;
}

/** An HTTP client with a cookie jar, like a browser on the app's own origin. */
export function httpClient(initialCookie = ''): HttpClient {
  const jar = new Map<string, string>();
  for (const part of initialCookie.split(';').map((s) => s.trim()).filter(Boolean)) {
    const [k, ...v] = part.split('=');
    jar.set(k, v.join('='));
  }
  const client: HttpClient = {
    get cookie() {
      return [...jar].map(([k, v]) => `${k}=${v}`).join('; ');
    },
    async request(method, path, body, headers = {}) {
      const isJson = body !== undefined && !(body instanceof FormData) && typeof body !== 'string';
      const response = await fetch(`${BASE_URL()}${path}`, {
        method,
        redirect: 'manual',
        headers: {
          origin: BASE_URL(),
          ...(isJson ? { 'content-type': 'application/json' } : {}),
          ...(jar.size ? { cookie: client.cookie } : {}),
          ...headers,
        },
        body: body === undefined ? undefined : isJson ? JSON.stringify(body) : (body as BodyInit),
      });
      for (const setCookie of response.headers.getSetCookie()) {
        const [pair, ...attributes] = setCookie.split(';');
        const [name, ...value] = pair.split('=');
        const expired = attributes.some((a) => /max-age=0/i.test(a.trim()));
        if (expired || value.join('=') === '') jar.delete(name.trim());
        else jar.set(name.trim(), value.join('='));
      }
      return response;
    },
    get: (path) => client.request('GET', path),
    post: (path, body) => client.request('POST', path, body),
    patch: (path, body) => client.request('PATCH', path, body),
    put: (path, body) => client.request('PUT', path, body),
    delete: (path) => client.request('DELETE', path),
  };
  return client;
}

/** Signs in through better-auth's real endpoint; throws unless it succeeds. */
export async function signIn(email: string, password = TEST_PASSWORD): Promise<HttpClient> {
  const client = httpClient();
  const response = await client.post('/api/auth/sign-in/email', { email, password });
  if (!response.ok) throw new Error(`sign-in as ${email} failed: ${response.status} ${await response.text()}`);
  return client;
}

/** Messages kept by the SMTP capture for one address, oldest first. */
export async function mailTo(address: string) {
  const dir = process.env.MAIL_CAPTURE_DIR;
  if (!dir) throw new Error('MAIL_CAPTURE_DIR is not set');
  return (await readCapturedMail(dir)).filter((m) => m.to.includes(address.toLowerCase()));
}

/** Polls for a message to arrive (SMTP delivery is asynchronous). */
export async function waitForMail(address: string, subjectIncludes: string, timeoutMs = 10_000) {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    const found = (await mailTo(address)).filter((m) => m.subject.includes(subjectIncludes));
    if (found.length > 0) return found[found.length - 1];
    await new Promise((r) => setTimeout(r, 100));
  }
  throw new Error(`No mail to ${address} with "${subjectIncludes}" within ${timeoutMs} ms`);
}

/** The first link in a message's text that starts with the app's address. */
export function linkIn(text: string): string {
  const match = text.match(new RegExp(`${BASE_URL().replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}\\S+`));
  if (!match) throw new Error(`no app link in: ${text}`);
  return match[0];
}

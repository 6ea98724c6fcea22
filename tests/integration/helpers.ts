/**
 * Helpers for integration tests: laboratories with one member per role, signed-in HTTP clients against the
 * built server (real cookies, real better-auth), and the captured mail.
 */
import { hashPassword } from 'better-auth/crypto';
import { getDb } from '../../src/server/db';
import { account, laboratories, memberships, user, ROLES, type Role } from '../../src/db/schema';
import { readCapturedMail } from '../../src/server/mailbox';
import { createHttpSession, signedInSession, type HttpSession } from '../../scripts/http-session';

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
  const suffix = crypto.randomUUID().slice(0, 8);
  const db = getDb();
  const [lab] = await db.insert(laboratories).values({ name: `Test ${label} ${suffix}`, slug: `${label}-${suffix}` }).returning();
  const people = {} as TestLab['people'];
  for (const role of ROLES) people[role] = await addMember(lab.id, role, `${role}-${suffix}@${label}.test`);
  return { id: lab.id, slug: lab.slug, name: lab.name, people };
}

/** One more person with the test password, a member of the laboratory in `role`. */
export async function addMember(laboratoryId: string, role: (typeof ROLES)[number], email: string) {
  passwordHash ??= hashPassword(TEST_PASSWORD);
  const db = getDb();
  const id = crypto.randomUUID();
  const name = email.split('@')[0].replace('-', ' ');
  await db.insert(user).values({ id, name, email, emailVerified: true });
  await db.insert(account).values({ id: crypto.randomUUID(), accountId: id, providerId: 'credential', userId: id, password: await passwordHash });
  await db.insert(memberships).values({ laboratoryId, userId: id, role });
  return { id, email, name };
}

export type HttpClient = HttpSession;

/** An HTTP client with a cookie jar against the built server, like a browser on the app's own origin. */
export const httpClient = (initialCookie = ''): HttpClient => createHttpSession(BASE_URL(), initialCookie);

/** Signs in through better-auth's real endpoint; throws unless it succeeds. */
export const signIn = (email: string, password = TEST_PASSWORD): Promise<HttpClient> => signedInSession(BASE_URL(), email, password);

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

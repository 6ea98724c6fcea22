/**
 * How each request finds its session (src/server/auth.ts requestSession): the signed cookie is checked, and the
 * session, its person and their memberships are read from the database on every request, so nothing about them is
 * remembered between requests; a session that has expired or is due to be extended goes through better-auth.
 */
import { eq } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { memberships, session } from '../../src/db/schema';
import { SESSION_HOURS } from '../../src/server/auth';
import { getDb } from '../../src/server/db';
import { createLabWithMembers, httpClient, signIn } from './helpers';

afterAll(() => getDb().$client.end());

const HOUR_MS = 3600_000;

async function sessionsOf(userId: string) {
  return getDb().select().from(session).where(eq(session.userId, userId));
}

describe('finding the session of a request', () => {
  it('refuses a cookie whose token is real but whose signature is not', async () => {
    const lab = await createLabWithMembers('forged-signature');
    const client = await signIn(lab.people.technician.email);
    expect((await client.get(`/api/labs/${lab.slug}/studies`)).status).toBe(200);
    const [name, value] = client.cookie.split(';')[0].split('=');
    const token = decodeURIComponent(value).split('.')[0];
    const forged = httpClient(`${name}=${encodeURIComponent(`${token}.${'A'.repeat(43)}=`)}`);
    expect((await forged.get(`/api/labs/${lab.slug}/studies`)).status).toBe(401);
  });

  it('applies a changed role on the very next request', async () => {
    const lab = await createLabWithMembers('role-now');
    const client = await signIn(lab.people.technician.email);
    expect((await client.get(`/api/labs/${lab.slug}/members`)).status).toBe(403);
    await getDb().update(memberships).set({ role: 'lab_admin' }).where(eq(memberships.userId, lab.people.technician.id));
    expect((await client.get(`/api/labs/${lab.slug}/members`)).status).toBe(200);
    await getDb().delete(memberships).where(eq(memberships.userId, lab.people.technician.id));
    // No longer a member: the laboratory looks like one that does not exist.
    expect((await client.get(`/api/labs/${lab.slug}/members`)).status).toBe(404);
  });

  it('extends a session that is due for it, and keeps serving it', async () => {
    const lab = await createLabWithMembers('extend');
    const client = await signIn(lab.people.technician.email);
    // As if it had last been extended an hour ago (better-auth extends after 15 minutes of use).
    const anHourOld = new Date(Date.now() + (SESSION_HOURS - 1) * HOUR_MS);
    await getDb().update(session).set({ expiresAt: anHourOld }).where(eq(session.userId, lab.people.technician.id));
    expect((await client.get(`/api/labs/${lab.slug}/studies`)).status).toBe(200);
    const [extended] = await sessionsOf(lab.people.technician.id);
    expect(extended.expiresAt.getTime()).toBeGreaterThan(anHourOld.getTime() + 0.9 * HOUR_MS);
    expect((await client.get(`/api/labs/${lab.slug}/studies`)).status).toBe(200);
  });

  it('refuses an expired session and removes it', async () => {
    const lab = await createLabWithMembers('expired');
    const client = await signIn(lab.people.technician.email);
    await getDb().update(session).set({ expiresAt: new Date(Date.now() - 60_000) }).where(eq(session.userId, lab.people.technician.id));
    expect((await client.get(`/api/labs/${lab.slug}/studies`)).status).toBe(401);
    expect(await sessionsOf(lab.people.technician.id)).toEqual([]);
  });
});

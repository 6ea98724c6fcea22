import { afterAll, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { getDb } from '../../src/server/db';
import { invitations } from '../../src/db/schema';
import { BASE_URL, createLabWithMembers, httpClient, signIn, TEST_PASSWORD } from './helpers';

afterAll(() => getDb().$client.end());

describe('sessions and cross-site requests', () => {
  it('a session cookie stops working after sign-out, even when replayed', async () => {
    const lab = await createLabWithMembers('stale');
    const client = await signIn(lab.people.lab_admin.email);
    const stolen = client.cookie;
    expect((await client.get(`/api/labs/${lab.slug}/members`)).status).toBe(200);
    expect((await client.post('/api/auth/sign-out', {})).status).toBe(200);
    const replay = httpClient(stolen);
    expect((await replay.get(`/api/labs/${lab.slug}/members`)).status).toBe(401);
  });

  it('signing in issues a new session token: a token planted beforehand is not adopted', async () => {
    const lab = await createLabWithMembers('fixation');
    const planted = 'better-auth.session_token=planted-token-value';
    const client = httpClient(planted);
    const response = await client.post('/api/auth/sign-in/email', { email: lab.people.technician.email, password: TEST_PASSWORD });
    expect(response.status).toBe(200);
    expect(client.cookie).toMatch(/better-auth\.session_token=/);
    expect(client.cookie).not.toContain('planted-token-value');
    expect((await httpClient(planted).get(`/labs/${lab.slug}`)).status).toBe(302);
  });

  it.each([
    ['a form post', 'application/x-www-form-urlencoded', 'email=x%40evil.test&role=lab_admin'],
    ['a JSON post', 'application/json', JSON.stringify({ email: 'x@evil.test', role: 'lab_admin' })],
  ])('refuses %s from another origin carrying the session cookie, and writes nothing', async (_label, type, body) => {
    const lab = await createLabWithMembers('csrf');
    const admin = await signIn(lab.people.lab_admin.email);
    const response = await fetch(`${BASE_URL()}/api/labs/${lab.slug}/invitations`, {
      method: 'POST',
      headers: { cookie: admin.cookie, origin: 'http://evil.example', 'content-type': type },
      body,
    });
    expect(response.status).toBe(403);
    const written = await getDb().select().from(invitations).where(eq(invitations.laboratoryId, lab.id));
    expect(written).toHaveLength(0);
  });

  it('session cookies are HttpOnly and SameSite', async () => {
    const lab = await createLabWithMembers('cookie');
    const response = await httpClient().post('/api/auth/sign-in/email', { email: lab.people.quality.email, password: TEST_PASSWORD });
    const cookie = response.headers.getSetCookie().find((c) => c.startsWith('better-auth.session_token='));
    expect(cookie).toMatch(/HttpOnly/i);
    expect(cookie).toMatch(/SameSite=Lax/i);
  });
});

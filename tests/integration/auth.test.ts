import { afterAll, describe, expect, it } from 'vitest';
import { getDb } from '../../src/server/db';
import { createLabWithMembers, httpClient, signIn, TEST_PASSWORD } from './helpers';

afterAll(() => getDb().$client.end());

describe('sign-in and sessions', () => {
  it('a member signs in, sees the lab, and loses access after signing out', async () => {
    const lab = await createLabWithMembers();
    const client = await signIn(lab.people.technician.email);
    expect(client.cookie).toMatch(/better-auth\.session_token=/);
    const home = await client.get(`/labs/${lab.slug}`);
    expect(home.status).toBe(200);
    expect(await home.text()).toContain(lab.name);

    const out = await client.post('/api/auth/sign-out', {});
    expect(out.status).toBe(200);
    const after = await client.get(`/api/labs/${lab.slug}/members`);
    expect(after.status).toBe(401);
  });

  it('a wrong password is refused', async () => {
    const lab = await createLabWithMembers();
    const response = await httpClient().post('/api/auth/sign-in/email', { email: lab.people.quality.email, password: `${TEST_PASSWORD}x` });
    expect(response.status).toBe(401);
  });
});

import { and, eq } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { getDb } from '../../src/server/db';
import { auditEvents, memberships, outgoingMail, rateLimit } from '../../src/db/schema';
import { ACCOUNT_LOCK } from '../../src/server/auth';
import { createLabWithMembers, httpClient, linkIn, signIn, TEST_PASSWORD, waitForMail } from './helpers';

const db = getDb();
afterAll(() => db.$client.end());

describe('e-mail flows, read back from the SMTP capture', () => {
  it('sign-up sends a verification e-mail whose link verifies the address and signs the person in', async () => {
    const email = `newcomer-${crypto.randomUUID().slice(0, 8)}@example.test`;
    const visitor = httpClient();
    const signUp = await visitor.post('/api/auth/sign-up/email', { name: 'New Comer', email, password: 'a-long-password-1', callbackURL: '/labs' });
    expect(signUp.status).toBe(200);

    // Unverified addresses cannot sign in yet.
    const early = await httpClient().post('/api/auth/sign-in/email', { email, password: 'a-long-password-1' });
    expect(early.status).toBe(403);

    const mail = await waitForMail(email, 'Confirm your e-mail address');
    expect(mail.text).toContain('Hello New Comer');
    const verify = await visitor.get(linkIn(mail.text).replace(/^https?:\/\/[^/]+/, ''));
    expect([200, 302]).toContain(verify.status);
    const labs = await visitor.get('/labs');
    expect(labs.status).toBe(200);
    expect(await labs.text()).toContain('You are not a member of a laboratory yet');

    const [recorded] = await db.select().from(outgoingMail).where(and(eq(outgoingMail.toAddress, email), eq(outgoingMail.kind, 'verification')));
    expect(recorded).toMatchObject({ status: 'sent', subject: 'Confirm your e-mail address for Biaswise' });
  });

  it('password reset: the e-mailed link sets a new password; the old one stops working', async () => {
    const lab = await createLabWithMembers('reset');
    const email = lab.people.technician.email;
    const request = await httpClient().post('/api/auth/request-password-reset', { email, redirectTo: '/reset-password' });
    expect(request.status).toBe(200);
    const mail = await waitForMail(email, 'Choose a new Biaswise password');
    const link = linkIn(mail.text).replace(/^https?:\/\/[^/]+/, '');
    // The link leads to our page with a token in the address.
    const landing = await httpClient().get(link);
    expect(landing.status).toBe(302);
    const token = new URL(landing.headers.get('location')!, 'http://x').searchParams.get('token');
    expect(token).toBeTruthy();
    const reset = await httpClient().post('/api/auth/reset-password', { token, newPassword: 'brand-new-password-9' });
    expect(reset.status).toBe(200);
    expect((await httpClient().post('/api/auth/sign-in/email', { email, password: TEST_PASSWORD })).status).toBe(401);
    await expect(signIn(email, 'brand-new-password-9')).resolves.toBeTruthy();
  });

  it('an invitation e-mail lets the invited address join with the role; the role menu follows', async () => {
    const lab = await createLabWithMembers('invite');
    const admin = await signIn(lab.people.lab_admin.email);
    const invitee = await createLabWithMembers('elsewhere');
    const email = invitee.people.technician.email;
    const sent = await admin.post(`/api/labs/${lab.slug}/invitations`, { email, role: 'medical_director' });
    expect(sent.status).toBe(201);
    const mail = await waitForMail(email, `You are invited to ${lab.name}`);
    const token = linkIn(mail.text).split('/invitations/')[1];

    // Someone else cannot use it.
    const other = await signIn(invitee.people.quality.email);
    expect((await other.post(`/api/invitations/${token}/accept`)).status).toBe(403);

    const person = await signIn(email);
    const accepted = await person.post(`/api/invitations/${token}/accept`);
    expect(accepted.status).toBe(200);
    expect(await accepted.json()).toEqual({ slug: lab.slug, role: 'medical_director' });
    const home = await (await person.get(`/labs/${lab.slug}`)).text();
    expect(home).toContain('Studies awaiting your signature');
    expect(home).not.toContain('>Members<');
    // Used once only.
    expect((await person.post(`/api/invitations/${token}/accept`)).status).toBe(404);
    const events = await db.select().from(auditEvents).where(eq(auditEvents.laboratoryId, lab.id));
    expect(events.map((e) => e.action)).toEqual(expect.arrayContaining(['member.invited', 'member.joined']));
  });
});

describe('laboratory isolation', () => {
  it("a member of lab A cannot read or change lab B's objects by guessing ids", async () => {
    const a = await createLabWithMembers('a');
    const b = await createLabWithMembers('b');
    const adminA = await signIn(a.people.lab_admin.email);
    const [bMembership] = await db.select().from(memberships).where(eq(memberships.userId, b.people.technician.id));

    expect((await adminA.get(`/api/labs/${b.slug}/members`)).status).toBe(404);
    expect((await adminA.get(`/labs/${b.slug}`)).status).toBe(404);
    // Lab B's membership id through lab A's address: not found, and unchanged.
    const patch = await adminA.patch(`/api/labs/${a.slug}/members/${bMembership.id}`, { role: 'lab_admin', version: 1 });
    expect(patch.status).toBe(404);
    expect((await adminA.delete(`/api/labs/${a.slug}/members/${bMembership.id}`)).status).toBe(404);
    const [after] = await db.select().from(memberships).where(eq(memberships.id, bMembership.id));
    expect(after.role).toBe('technician');
  });
});

describe('members and roles', () => {
  it('the administrator changes a role with optimistic concurrency and removes a member, both audited', async () => {
    const lab = await createLabWithMembers('roles');
    const admin = await signIn(lab.people.lab_admin.email);
    const list = await (await admin.get(`/api/labs/${lab.slug}/members`)).json();
    const tech = list.members.find((m: { userId: string }) => m.userId === lab.people.technician.id);

    const changed = await admin.patch(`/api/labs/${lab.slug}/members/${tech.membershipId}`, { role: 'lab_scientist', version: tech.version });
    expect(changed.status).toBe(200);
    const stale = await admin.patch(`/api/labs/${lab.slug}/members/${tech.membershipId}`, { role: 'quality', version: tech.version });
    expect(stale.status).toBe(409);
    expect(stale.headers.get('content-type')).toContain('application/problem+json');

    const bad = await admin.patch(`/api/labs/${lab.slug}/members/${tech.membershipId}`, { role: 'janitor', version: 2 });
    expect(bad.status).toBe(422);
    expect((await bad.json()).errors[0].field).toBe('role');

    expect((await admin.delete(`/api/labs/${lab.slug}/members/${tech.membershipId}`)).status).toBe(204);
    const events = await db.select().from(auditEvents).where(eq(auditEvents.laboratoryId, lab.id));
    expect(events.map((e) => e.action)).toEqual(expect.arrayContaining(['member.role_changed', 'member.removed']));
    const roleChange = events.find((e) => e.action === 'member.role_changed');
    expect(roleChange?.data).toMatchObject({ from: 'technician', to: 'lab_scientist' });
  });

  it('the last administrator cannot be demoted', async () => {
    const lab = await createLabWithMembers('lastadmin');
    const admin = await signIn(lab.people.lab_admin.email);
    const list = await (await admin.get(`/api/labs/${lab.slug}/members`)).json();
    const self = list.members.find((m: { userId: string }) => m.userId === lab.people.lab_admin.id);
    const response = await admin.patch(`/api/labs/${lab.slug}/members/${self.membershipId}`, { role: 'technician', version: self.version });
    expect(response.status).toBe(409);
    expect((await response.json()).detail).toContain('at least one administrator');
  });
});

describe('sign-in rate limiting, kept in the database', () => {
  it(`locks an address after ${ACCOUNT_LOCK.failures} failed sign-ins, even with the right password`, async () => {
    const lab = await createLabWithMembers('lock');
    const email = lab.people.quality.email;
    for (let i = 0; i < ACCOUNT_LOCK.failures; i++) {
      expect((await httpClient().post('/api/auth/sign-in/email', { email, password: 'wrong-password-x' })).status).toBe(401);
    }
    const locked = await httpClient().post('/api/auth/sign-in/email', { email, password: TEST_PASSWORD });
    expect(locked.status).toBe(429);
    // The failures are rows in PostgreSQL, so a restart or a second app server sees them too.
    const failures = await db.select().from(auditEvents).where(eq(auditEvents.action, 'auth.sign_in_failed'));
    expect(failures.filter((e) => (e.data as { email?: string }).email === email)).toHaveLength(ACCOUNT_LOCK.failures);
    // Per-address request counters of better-auth live in the database as well.
    const counters = await db.select().from(rateLimit);
    expect(counters.some((row) => row.key.includes('/sign-in/email'))).toBe(true);
  });
});

/** Laboratories, who belongs to them with which role, invitations, and lab-scoped API tokens. */
import { createHash, randomBytes } from 'node:crypto';
import { and, asc, eq, gt, isNull } from 'drizzle-orm';
import { getDb } from './db';
import { apiTokens, invitations, laboratories, memberships, user, type Role } from '../db/schema';
import { recordAudit } from './audit';
import { conflict, forbidden, notFound, Problem } from './problem';
import { sendMail } from './mail';
import { invitationMail } from './mailTemplates';
import { ROLE_LABELS } from './permissions';

export interface LabMembership {
  laboratoryId: string;
  slug: string;
  name: string;
  role: Role;
}

export const sha256 = (text: string) => createHash('sha256').update(text).digest('hex');

export async function membershipsOf(userId: string): Promise<LabMembership[]> {
  return getDb()
    .select({ laboratoryId: laboratories.id, slug: laboratories.slug, name: laboratories.name, role: memberships.role })
    .from(memberships)
    .innerJoin(laboratories, eq(laboratories.id, memberships.laboratoryId))
    .where(eq(memberships.userId, userId))
    .orderBy(asc(laboratories.name));
}

export async function labBySlug(slug: string) {
  const [lab] = await getDb().select().from(laboratories).where(eq(laboratories.slug, slug));
  return lab ?? null;
}

export async function listMembers(laboratoryId: string) {
  return getDb()
    .select({ membershipId: memberships.id, userId: user.id, name: user.name, email: user.email, role: memberships.role, version: memberships.version })
    .from(memberships)
    .innerJoin(user, eq(user.id, memberships.userId))
    .where(eq(memberships.laboratoryId, laboratoryId))
    .orderBy(asc(user.name));
}

async function adminCount(laboratoryId: string) {
  const admins = await getDb()
    .select({ id: memberships.id })
    .from(memberships)
    .where(and(eq(memberships.laboratoryId, laboratoryId), eq(memberships.role, 'lab_admin')));
  return admins.length;
}

export async function changeRole(actorId: string, laboratoryId: string, membershipId: string, role: Role, expectedVersion: number) {
  const db = getDb();
  return db.transaction(async (tx) => {
    const [current] = await tx
      .select()
      .from(memberships)
      .where(and(eq(memberships.id, membershipId), eq(memberships.laboratoryId, laboratoryId)))
      .for('update');
    if (!current) throw notFound('member');
    if (current.version !== expectedVersion) throw conflict('This membership was changed by someone else; reload and try again.', { current });
    if (current.role === 'lab_admin' && role !== 'lab_admin' && (await adminCount(laboratoryId)) <= 1) {
      throw new Problem(409, 'Last administrator', 'A laboratory keeps at least one administrator.');
    }
    const [updated] = await tx
      .update(memberships)
      .set({ role, version: current.version + 1 })
      .where(eq(memberships.id, membershipId))
      .returning();
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actorId,
      action: 'member.role_changed',
      entityType: 'membership',
      entityId: membershipId,
      data: { userId: current.userId, from: current.role, to: role },
    });
    return updated;
  });
}

export async function removeMember(actorId: string, laboratoryId: string, membershipId: string) {
  return getDb().transaction(async (tx) => {
    const [current] = await tx
      .select()
      .from(memberships)
      .where(and(eq(memberships.id, membershipId), eq(memberships.laboratoryId, laboratoryId)))
      .for('update');
    if (!current) throw notFound('member');
    if (current.role === 'lab_admin' && (await adminCount(laboratoryId)) <= 1) {
      throw new Problem(409, 'Last administrator', 'A laboratory keeps at least one administrator.');
    }
    await tx.delete(memberships).where(eq(memberships.id, membershipId));
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actorId,
      action: 'member.removed',
      entityType: 'membership',
      entityId: membershipId,
      data: { userId: current.userId, role: current.role },
    });
  });
}

export const INVITATION_DAYS = 7;

/** Invites an address to the laboratory with a role; the e-mail carries a one-time token (stored hashed). */
export async function invite(actor: { id: string; name: string }, lab: { id: string; name: string }, email: string, role: Role, baseUrl: string) {
  const token = randomBytes(24).toString('base64url');
  const normalized = email.trim().toLowerCase();
  const invitation = await getDb().transaction(async (tx) => {
    const [row] = await tx
      .insert(invitations)
      .values({
        laboratoryId: lab.id,
        email: normalized,
        role,
        tokenHash: sha256(token),
        invitedBy: actor.id,
        expiresAt: new Date(Date.now() + INVITATION_DAYS * 86_400_000),
      })
      .returning();
    await recordAudit(tx, { laboratoryId: lab.id, actorUserId: actor.id, action: 'member.invited', entityType: 'invitation', entityId: row.id, data: { email: normalized, role } });
    return row;
  });
  await sendMail(
    normalized,
    invitationMail({ laboratory: lab.name, role: ROLE_LABELS[role], invitedBy: actor.name, url: `${baseUrl}/invitations/${token}` }),
    lab.id,
  );
  return invitation;
}

export async function findInvitation(token: string) {
  const [row] = await getDb()
    .select({ invitation: invitations, labName: laboratories.name, labSlug: laboratories.slug })
    .from(invitations)
    .innerJoin(laboratories, eq(laboratories.id, invitations.laboratoryId))
    .where(and(eq(invitations.tokenHash, sha256(token)), isNull(invitations.acceptedAt), gt(invitations.expiresAt, new Date())));
  return row ?? null;
}

/** Accepts an invitation for the signed-in person, whose verified address must be the invited one. */
export async function acceptInvitation(person: { id: string; email: string; emailVerified: boolean }, token: string) {
  const found = await findInvitation(token);
  if (!found) throw new Problem(404, 'Invitation not found', 'This invitation does not exist, was already used, or has expired.');
  if (found.invitation.email !== person.email.toLowerCase() || !person.emailVerified) {
    throw forbidden('accept an invitation sent to another address (sign in with the invited, verified address)');
  }
  await getDb().transaction(async (tx) => {
    await tx.update(invitations).set({ acceptedAt: new Date() }).where(eq(invitations.id, found.invitation.id));
    await tx
      .insert(memberships)
      .values({ laboratoryId: found.invitation.laboratoryId, userId: person.id, role: found.invitation.role })
      .onConflictDoUpdate({ target: [memberships.laboratoryId, memberships.userId], set: { role: found.invitation.role } });
    await recordAudit(tx, {
      laboratoryId: found.invitation.laboratoryId,
      actorUserId: person.id,
      action: 'member.joined',
      entityType: 'invitation',
      entityId: found.invitation.id,
      data: { role: found.invitation.role },
    });
  });
  return { slug: found.labSlug, role: found.invitation.role };
}

// ---- API tokens for middleware and LIS uploads ----

export const TOKEN_PREFIX = 'bw_';

export async function createApiToken(actorId: string, laboratoryId: string, name: string) {
  const secret = `${TOKEN_PREFIX}${randomBytes(32).toString('base64url')}`;
  const row = await getDb().transaction(async (tx) => {
    const [created] = await tx
      .insert(apiTokens)
      .values({ laboratoryId, name, tokenHash: sha256(secret), createdBy: actorId })
      .returning({ id: apiTokens.id, name: apiTokens.name, createdAt: apiTokens.createdAt });
    await recordAudit(tx, { laboratoryId, actorUserId: actorId, action: 'token.created', entityType: 'api_token', entityId: created.id, data: { name } });
    return created;
  });
  // The secret is shown once; only its hash is kept.
  return { ...row, secret };
}

export async function listApiTokens(laboratoryId: string) {
  return getDb()
    .select({ id: apiTokens.id, name: apiTokens.name, createdAt: apiTokens.createdAt, lastUsedAt: apiTokens.lastUsedAt, revokedAt: apiTokens.revokedAt })
    .from(apiTokens)
    .where(eq(apiTokens.laboratoryId, laboratoryId))
    .orderBy(asc(apiTokens.createdAt));
}

export async function revokeApiToken(actorId: string, laboratoryId: string, tokenId: string) {
  await getDb().transaction(async (tx) => {
    const [revoked] = await tx
      .update(apiTokens)
      .set({ revokedAt: new Date() })
      .where(and(eq(apiTokens.id, tokenId), eq(apiTokens.laboratoryId, laboratoryId), isNull(apiTokens.revokedAt)))
      .returning({ id: apiTokens.id });
    if (!revoked) throw notFound('active API token');
    await recordAudit(tx, { laboratoryId, actorUserId: actorId, action: 'token.revoked', entityType: 'api_token', entityId: tokenId });
  });
}

/** The laboratory an API token belongs to, or null when it is unknown or revoked. */
export async function laboratoryForToken(secret: string): Promise<string | null> {
  const [row] = await getDb()
    .update(apiTokens)
    .set({ lastUsedAt: new Date() })
    .where(and(eq(apiTokens.tokenHash, sha256(secret)), isNull(apiTokens.revokedAt)))
    .returning({ laboratoryId: apiTokens.laboratoryId });
  return row?.laboratoryId ?? null;
}

/**
 * Sign-in with better-auth on the project's PostgreSQL: e-mail and password, verified addresses, password
 * reset, database sessions in HttpOnly cookies, and rate limits kept in the database so that they hold
 * across restarts and across several app servers.
 */
import { createHmac, timingSafeEqual } from 'node:crypto';
import { betterAuth } from 'better-auth';
import { drizzleAdapter } from 'better-auth/adapters/drizzle';
import { APIError, createAuthMiddleware, getSessionFromCtx } from 'better-auth/api';
import { verifyPassword } from 'better-auth/crypto';
import { and, asc, count, eq, gt, sql } from 'drizzle-orm';
import { BETTER_AUTH_SECRET, PUBLIC_BASE_URL, SIGN_IN_LIMIT_PER_MINUTE } from 'astro:env/server';
import { getDb } from './db';
import * as schema from '../db/schema';
import { recordAudit } from './audit';
import { membershipsOf, type LabMembership } from './laboratories';
import { sendMail } from './mail';
import { passwordResetMail, verificationMail } from './mailTemplates';

/** Header our auth route fills with the peer address, so rate limits are per client; never trusted from outside. */
export const CLIENT_IP_HEADER = 'x-biaswise-client-ip';
/** Failed sign-ins per address within the window before that account is refused for a while. */
export const ACCOUNT_LOCK = { failures: 5, minutes: 15 } as const;
export const SESSION_HOURS = 12;
/** A session used this long after it was last extended is extended again (better-auth's updateAge). */
const SESSION_REFRESH_SECONDS = 15 * 60;

function createAuth() {
  const db = getDb();
  return betterAuth({
    appName: 'Biaswise',
    baseURL: PUBLIC_BASE_URL,
    secret: BETTER_AUTH_SECRET,
    trustedOrigins: [PUBLIC_BASE_URL],
    database: drizzleAdapter(db, { provider: 'pg', schema }),
    emailAndPassword: {
      enabled: true,
      requireEmailVerification: true,
      minPasswordLength: 10,
      resetPasswordTokenExpiresIn: 3600,
      revokeSessionsOnPasswordReset: true,
      sendResetPassword: async ({ user, url }) => {
        await sendMail(user.email, passwordResetMail({ name: user.name, url }));
      },
    },
    emailVerification: {
      sendOnSignUp: true,
      autoSignInAfterVerification: true,
      expiresIn: 3600,
      sendVerificationEmail: async ({ user, url }) => {
        await sendMail(user.email, verificationMail({ name: user.name, url }));
      },
    },
    session: {
      expiresIn: SESSION_HOURS * 3600,
      updateAge: SESSION_REFRESH_SECONDS,
      additionalFields: { activeLaboratoryId: { type: 'string', required: false, input: false } },
    },
    rateLimit: {
      enabled: true,
      storage: 'database',
      window: 60,
      max: 200,
      customRules: {
        '/sign-in/email': { window: 60, max: SIGN_IN_LIMIT_PER_MINUTE },
        '/sign-up/email': { window: 60, max: 10 },
        '/request-password-reset': { window: 60, max: 5 },
      },
    },
    advanced: {
      useSecureCookies: PUBLIC_BASE_URL.startsWith('https://'),
      ipAddress: { ipAddressHeaders: [CLIENT_IP_HEADER] },
      database: { generateId: () => crypto.randomUUID() },
    },
    hooks: {
      before: createAuthMiddleware(async (ctx) => {
        if (ctx.path === '/sign-in/email') {
          const email = String(ctx.body?.email ?? '').toLowerCase();
          if (await recentFailures(email) >= ACCOUNT_LOCK.failures) {
            throw new APIError('TOO_MANY_REQUESTS', {
              message: `Too many failed sign-ins for this address. Try again in ${ACCOUNT_LOCK.minutes} minutes or reset the password.`,
            });
          }
        }
        if (ctx.path === '/sign-out') {
          const current = await getSessionFromCtx(ctx);
          if (current) {
            await recordAudit(db, { laboratoryId: null, actorUserId: current.user.id, action: 'auth.sign_out', entityType: 'user', entityId: current.user.id });
          }
        }
      }),
      after: createAuthMiddleware(async (ctx) => {
        if (ctx.path !== '/sign-in/email') return;
        const email = String(ctx.body?.email ?? '').toLowerCase();
        const signedIn = ctx.context.newSession;
        if (signedIn) {
          await recordAudit(db, { laboratoryId: null, actorUserId: signedIn.user.id, action: 'auth.sign_in', entityType: 'user', entityId: signedIn.user.id, data: { email } });
        } else {
          await recordAudit(db, { laboratoryId: null, actorUserId: null, action: 'auth.sign_in_failed', entityType: 'user', data: { email } });
        }
      }),
    },
  });
}

async function recentFailures(email: string): Promise<number> {
  const since = new Date(Date.now() - ACCOUNT_LOCK.minutes * 60_000);
  const [row] = await getDb()
    .select({ n: count() })
    .from(schema.auditEvents)
    .where(
      and(
        eq(schema.auditEvents.action, 'auth.sign_in_failed'),
        sql`${schema.auditEvents.data}->>'email' = ${email}`,
        gt(schema.auditEvents.occurredAt, since),
      ),
    );
  return row?.n ?? 0;
}

let instance: ReturnType<typeof createAuth> | undefined;
export function getAuth() {
  instance ??= createAuth();
  return instance;
}
export type Auth = ReturnType<typeof createAuth>;
export type SessionData = NonNullable<Awaited<ReturnType<Auth['api']['getSession']>>>;

/**
 * Checks the signed-in person's password again (for electronic signatures). Returns true only for the
 * right password of a verified account; never says which part was wrong.
 */
export async function reauthenticate(userId: string, password: string): Promise<boolean> {
  const [credential] = await getDb()
    .select({ hash: schema.account.password })
    .from(schema.account)
    .where(and(eq(schema.account.userId, userId), eq(schema.account.providerId, 'credential')));
  if (!credential?.hash || !password) return false;
  return verifyPassword({ hash: credential.hash, password });
}

/** The signed-in person of a request, with their laboratories: what the middleware puts on Astro.locals. */
export interface RequestSession {
  user: SessionData['user'];
  session: SessionData['session'];
  memberships: LabMembership[];
}

/** The session row, its user and each membership with its laboratory, by session token: one prepared statement. */
let sessionByToken: ReturnType<typeof prepareSessionByToken> | undefined;
function prepareSessionByToken() {
  const { session, user, memberships, laboratories } = schema;
  return getDb()
    .select({
      session,
      user,
      membership: { laboratoryId: laboratories.id, slug: laboratories.slug, name: laboratories.name, role: memberships.role },
    })
    .from(session)
    .innerJoin(user, eq(user.id, session.userId))
    .leftJoin(memberships, eq(memberships.userId, session.userId))
    .leftJoin(laboratories, eq(laboratories.id, memberships.laboratoryId))
    .where(eq(session.token, sql.placeholder('token')))
    .orderBy(asc(laboratories.name))
    .prepare('request_session');
}

/**
 * The session token of a request's signed session cookie, or null when there is none or its signature (HMAC-SHA256
 * with the auth secret, base64, appended after a dot, as better-auth signs it) does not match.
 */
function signedSessionToken(cookieHeader: string, cookieName: string): string | null {
  for (const part of cookieHeader.split(';')) {
    const at = part.indexOf('=');
    if (at < 0 || part.slice(0, at).trim() !== cookieName) continue;
    let value = part.slice(at + 1).trim();
    try {
      value = decodeURIComponent(value);
    } catch {
      return null;
    }
    const dot = value.lastIndexOf('.');
    if (dot < 1) return null;
    const token = value.slice(0, dot);
    const given = Buffer.from(value.slice(dot + 1));
    const expected = Buffer.from(createHmac('sha256', BETTER_AUTH_SECRET).update(token).digest('base64'));
    return given.length === expected.length && timingSafeEqual(given, expected) ? token : null;
  }
  return null;
}

/**
 * The request's session, user and memberships, read from the database on every request (so a signed-out or revoked
 * session is refused at once, in every server process) in one query. A session that has expired or is due to be
 * extended goes through better-auth's own getSession, which removes or extends it.
 *
 * @example
 * const current = await requestSession(request.headers); // null when signed out
 */
export async function requestSession(headers: Headers): Promise<RequestSession | null> {
  const cookieName = (await getAuth().$context).authCookies.sessionToken.name;
  const token = signedSessionToken(headers.get('cookie') ?? '', cookieName);
  if (!token) return null;
  sessionByToken ??= prepareSessionByToken();
  const rows = await sessionByToken.execute({ token });
  if (rows.length === 0) return null;
  const { session, user } = rows[0];
  const extendAfter = session.expiresAt.getTime() - SESSION_HOURS * 3600_000 + SESSION_REFRESH_SECONDS * 1000;
  if (extendAfter <= Date.now()) {
    const checked = await getAuth().api.getSession({ headers });
    if (!checked) return null;
    return { user: checked.user, session: checked.session, memberships: await membershipsOf(checked.user.id) };
  }
  // A left join's columns are typed nullable; a membership row has them all, one without any has none.
  const memberships = rows.flatMap(({ membership: m }) => (m && m.laboratoryId && m.slug && m.name && m.role ? [{ laboratoryId: m.laboratoryId, slug: m.slug, name: m.name, role: m.role }] : []));
  return { user, session, memberships };
}

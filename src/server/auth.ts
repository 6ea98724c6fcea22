/**
 * Sign-in with better-auth on the project's PostgreSQL: e-mail and password, verified addresses, password
 * reset, database sessions in HttpOnly cookies, and rate limits kept in the database so that they hold
 * across restarts and across several app servers.
 */
import { betterAuth } from 'better-auth';
import { drizzleAdapter } from 'better-auth/adapters/drizzle';
import { APIError, createAuthMiddleware, getSessionFromCtx } from 'better-auth/api';
import { verifyPassword } from 'better-auth/crypto';
import { and, count, eq, gt, sql } from 'drizzle-orm';
import { BETTER_AUTH_SECRET, PUBLIC_BASE_URL, SIGN_IN_LIMIT_PER_MINUTE } from 'astro:env/server';
import { getDb } from './db';
import * as schema from '../db/schema';
import { recordAudit } from './audit';
import { sendMail } from './mail';
import { passwordResetMail, verificationMail } from './mailTemplates';

/** Header our auth route fills with the peer address, so rate limits are per client; never trusted from outside. */
export const CLIENT_IP_HEADER = 'x-biaswise-client-ip';
/** Failed sign-ins per address within the window before that account is refused for a while. */
export const ACCOUNT_LOCK = { failures: 5, minutes: 15 } as const;
export const SESSION_HOURS = 12;

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
      updateAge: 15 * 60,
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

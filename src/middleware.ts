import { defineMiddleware } from 'astro:middleware';
import { PUBLIC_BASE_URL } from 'astro:env/server';
import { requestSession } from './server/auth';
import { outageProblem } from './server/health';
import { labBySlug, laboratoryForToken } from './server/laboratories';
import { notFound, problemResponse, Problem, unauthenticated } from './server/problem';
import { ensureWorkers } from './server/workers';

const LAB_ROUTE = /^\/(api\/)?labs\/([^/]+)/;
const SAFE_METHODS = new Set(['GET', 'HEAD', 'OPTIONS']);

/**
 * A browser always names the page's origin on a cross-site request; refuse every unsafe request that names
 * another one (Astro's own check covers only form content types). Clients without an Origin header (scripts,
 * LIS middleware with tokens) are not browsers and are unaffected.
 */
function crossOrigin(request: Request, url: URL): boolean {
  if (SAFE_METHODS.has(request.method)) return false;
  const origin = request.headers.get('origin');
  return origin !== null && origin !== url.origin && origin !== new URL(PUBLIC_BASE_URL).origin;
}

/** Session → locals, and the laboratory in the URL checked against the caller's memberships. */
export const onRequest = defineMiddleware(async (context, next) => {
  const { locals, url, request } = context;
  ensureWorkers();
  locals.user = null;
  locals.session = null;
  locals.memberships = [];
  locals.lab = null;
  locals.role = null;
  locals.viaApiToken = false;

  const path = url.pathname;
  if (crossOrigin(request, url)) {
    return problemResponse(new Problem(403, 'Cross-site request refused', 'This request came from another site and was refused.'));
  }
  if (path.startsWith('/_astro/') || path.startsWith('/api/auth/') || path === '/api/health' || path === '/favicon.svg') {
    return next();
  }

  const labRoute = path.match(LAB_ROUTE);
  const isApi = path.startsWith('/api/');
  const bearer = request.headers.get('authorization')?.match(/^Bearer\s+(\S+)$/i)?.[1];

  if (bearer && labRoute && isApi) {
    const tokenLab = await laboratoryForToken(bearer);
    if (!tokenLab) return problemResponse(new Problem(401, 'Invalid token', 'The API token is unknown or was revoked.'));
    const lab = await labBySlug(labRoute[2]);
    if (!lab || lab.id !== tokenLab) return problemResponse(notFound('laboratory'));
    locals.lab = { id: lab.id, slug: lab.slug, name: lab.name };
    locals.viaApiToken = true;
    return next();
  }

  try {
    const current = await requestSession(request.headers);
    if (current) {
      locals.user = current.user;
      locals.session = current.session;
      locals.memberships = current.memberships;
    }
  } catch (error) {
    // With the database away, say so (503) rather than answer an empty 500.
    const outage = await outageProblem();
    if (!outage) throw error;
    if (isApi) return problemResponse(outage);
    return new Response(outage.detail, { status: 503, headers: { 'content-type': 'text/plain; charset=utf-8', 'cache-control': 'no-store' } });
  }

  if (labRoute) {
    if (!locals.user) {
      if (isApi) return problemResponse(unauthenticated());
      return context.redirect(`/sign-in?next=${encodeURIComponent(path + url.search)}`);
    }
    const membership = locals.memberships.find((m) => m.slug === decodeURIComponent(labRoute[2]));
    if (!membership) {
      // Another laboratory's address looks exactly like one that does not exist.
      if (isApi) return problemResponse(notFound('laboratory'));
      return context.rewrite('/404');
    }
    locals.lab = { id: membership.laboratoryId, slug: membership.slug, name: membership.name };
    locals.role = membership.role;
  }
  return next();
});

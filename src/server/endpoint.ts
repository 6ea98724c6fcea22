/** Keeps endpoints thin: access checks, and every thrown Problem or zod error answered as problem+json. */
import type { APIContext, APIRoute } from 'astro';
import { z } from 'zod';
import { outageProblem } from './health';
import { can, type Action } from './permissions';
import { fieldErrorsFromZod, forbidden, invalid, Problem, problemFromDatabase, problemResponse, unauthenticated } from './problem';

const ACTION_WORDS: Record<Action, string> = {
  read: 'read this laboratory',
  'protocol.edit': 'edit protocols',
  'protocol.approve': 'approve protocols',
  'study.open': 'open studies',
  'results.enter': 'enter results',
  'sample.exclude': 'exclude samples',
  'analysis.run': 'run analyses',
  'study.submit': 'submit studies for sign-off',
  'study.sign': 'sign studies',
  'dossier.export': 'export the study dossier',
  'members.manage': 'manage members',
  'tokens.manage': 'manage API tokens',
};

type SignedInUser = NonNullable<App.Locals['user']>;

/** The laboratory of the request and the signed-in member, after checking that their role may do `action`. */
export function requireLab(locals: App.Locals, action: Action): { lab: NonNullable<App.Locals['lab']>; user: SignedInUser } {
  if (locals.viaApiToken) throw forbidden(`${ACTION_WORDS[action]} with an API token`);
  if (!locals.user || !locals.lab) throw unauthenticated();
  if (!can(locals.role, action)) throw forbidden(ACTION_WORDS[action]);
  return { lab: locals.lab, user: locals.user };
}

/**
 * Like requireLab, but a lab-scoped API token may also enter results (middleware and LIS uploads);
 * `user` is null for a token.
 */
export function requireLabOrToken(locals: App.Locals, action: 'results.enter'): { lab: NonNullable<App.Locals['lab']>; user: SignedInUser | null } {
  if (locals.viaApiToken && locals.lab) return { lab: locals.lab, user: null };
  return requireLab(locals, action);
}

/** The signed-in person, for endpoints outside a laboratory. */
export function requireUser(locals: App.Locals) {
  if (!locals.user) throw unauthenticated();
  return locals.user;
}

export const json = (body: unknown, status = 200) => jsonText(JSON.stringify(body), status);

/**
 * A JSON answer from text already serialized (a string, or UTF-8 bytes), with json()'s headers.
 *
 * @example
 * return jsonText('{"ok":true}');
 */
export const jsonText = (text: string | Uint8Array<ArrayBuffer>, status = 200) =>
  new Response(text, { status, headers: { 'content-type': 'application/json', 'cache-control': 'no-store' } });

export function endpoint(handler: (context: APIContext) => Promise<Response>): APIRoute {
  return async (context) => {
    try {
      return await handler(context);
    } catch (error) {
      if (error instanceof Problem) return problemResponse(error);
      if (error instanceof z.ZodError) return problemResponse(invalid('The data is not valid.', fieldErrorsFromZod(error)));
      const refused = problemFromDatabase(error);
      if (refused) return problemResponse(refused);
      console.error(error);
      return problemResponse((await outageProblem()) ?? new Problem(500, 'Server error', 'Something went wrong on the server; nothing was saved.'));
    }
  };
}

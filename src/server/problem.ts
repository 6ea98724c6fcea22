/**
 * Errors as application/problem+json (RFC 9457). Services throw `Problem`; endpoints turn it (and zod
 * errors) into a response with a clear `detail` and, for invalid data, per-field `errors`.
 */
import { z } from 'zod';

export interface FieldError {
  /** Dotted path of the field, e.g. "decisionLevels.1.value", or "line 14" for a file. */
  field: string;
  message: string;
}

export class Problem extends Error {
  constructor(
    readonly status: number,
    readonly title: string,
    readonly detail: string,
    readonly errors?: FieldError[],
    readonly extra?: Record<string, unknown>,
  ) {
    super(detail);
    this.name = 'Problem';
  }
}

export const unauthenticated = () => new Problem(401, 'Sign-in required', 'Sign in to use this.');
export const forbidden = (what: string) => new Problem(403, 'Not allowed', `Your role does not allow you to ${what}.`);
/** The same answer whether the object is missing or belongs to another laboratory. */
export const notFound = (what: string) => new Problem(404, 'Not found', `No ${what} with that id in this laboratory.`);
export const conflict = (detail: string, extra?: Record<string, unknown>) => new Problem(409, 'Changed by someone else', detail, undefined, extra);
export const invalid = (detail: string, errors: FieldError[]) => new Problem(422, 'Invalid data', detail, errors);

export function fieldErrorsFromZod(error: z.ZodError): FieldError[] {
  return error.issues.map((issue) => ({ field: issue.path.map(String).join('.') || '(body)', message: issue.message }));
}

export function problemResponse(problem: Problem): Response {
  return new Response(
    JSON.stringify({
      type: 'about:blank',
      title: problem.title,
      status: problem.status,
      detail: problem.detail,
      ...(problem.errors ? { errors: problem.errors } : {}),
      ...problem.extra,
    }),
    { status: problem.status, headers: { 'content-type': 'application/problem+json', 'cache-control': 'no-store' } },
  );
}

/** Parses a body with zod or throws a 422 Problem naming each bad field. */
export function parseBody<T extends z.ZodType>(schema: T, body: unknown): z.output<T> {
  const result = schema.safeParse(body);
  if (!result.success) {
    const errors = fieldErrorsFromZod(result.error);
    throw invalid(`${errors.length} field${errors.length === 1 ? '' : 's'} need attention: ${errors.map((e) => e.field).join(', ')}.`, errors);
  }
  return result.data;
}

const LONE_SURROGATE = /[\ud800-\udbff](?![\udc00-\udfff])|(?<![\ud800-\udbff])[\udc00-\udfff]/;
// Embedding, override and isolate controls make stored text (an audit reason, a sample code) read otherwise than it shows.
const DIRECTION_CONTROL = /[\u202a-\u202e\u2066-\u2069]/;
const ONLY_INVISIBLE = /^[\s\p{Cf}]*\p{Cf}[\s\p{Cf}]*$/u;

function textProblem(text: string): string | null {
  if (text.includes('\u0000')) return 'Remove the NUL character; text cannot hold it.';
  if (LONE_SURROGATE.test(text)) return 'This is not valid Unicode text (it has a lone surrogate).';
  if (DIRECTION_CONTROL.test(text)) return 'Remove the text-direction control character; it makes the text read differently from how it shows.';
  if (ONLY_INVISIBLE.test(text)) return 'This has only invisible characters; type visible text.';
  return null;
}

/**
 * Refuses (422, naming each field) a parsed JSON value with a string or key that no text field takes: a NUL
 * (PostgreSQL text cannot store it), a lone surrogate, a text-direction control, or only invisible characters.
 *
 * @example
 * refuseUnsafeText({ reason: 'ok\u0000' }); // throws invalid(…, [{ field: 'reason', message: 'Remove the NUL character; …' }])
 */
export function refuseUnsafeText(value: unknown): void {
  const errors: FieldError[] = [];
  // A loop, not recursion: a body nested a hundred thousand deep must not overflow the stack.
  const pending: { item: unknown; path: string }[] = [{ item: value, path: '' }];
  while (pending.length > 0) {
    const { item, path } = pending.pop()!;
    if (typeof item === 'string') {
      const message = textProblem(item);
      if (message) errors.push({ field: path || '(body)', message });
    } else if (item !== null && typeof item === 'object') {
      for (const [key, child] of Object.entries(item)) {
        const childPath = path ? `${path}.${key}` : key;
        const keyMessage = textProblem(key);
        if (keyMessage) errors.push({ field: childPath, message: `The field name: ${keyMessage}` });
        pending.push({ item: child, path: childPath });
      }
    }
  }
  if (errors.length > 0) throw invalid(`${errors.length} field${errors.length === 1 ? '' : 's'} need attention: ${errors.map((e) => e.field).join(', ')}.`, errors);
}

/** Reads a JSON request body, refusing what is not JSON with a clear 400/415, and unsafe text with a 422. */
export async function readJson(request: Request, maxBytes = 1_000_000): Promise<unknown> {
  const type = request.headers.get('content-type') ?? '';
  if (!type.includes('application/json')) {
    throw new Problem(415, 'Unsupported media type', 'Send the body as application/json.');
  }
  const text = await request.text();
  if (text.length > maxBytes) throw new Problem(413, 'Body too large', `The body is larger than ${maxBytes} bytes.`);
  let body: unknown;
  try {
    body = JSON.parse(text);
  } catch (error) {
    throw new Problem(400, 'Malformed JSON', `The body is not valid JSON: ${(error as Error).message}`);
  }
  refuseUnsafeText(body);
  return body;
}

/** PostgreSQL's check_violation (SQLSTATE 23514): CHECK constraints, and the lock and freeze triggers. */
const CHECK_VIOLATION = '23514';
/** unique_violation (SQLSTATE 23505). */
const UNIQUE_VIOLATION = '23505';

/**
 * A refusal by the database itself, as a Problem: the lock of a signed study or an approved protocol, or a
 * unique value taken by a concurrent save (409), or a CHECK constraint (422). Services refuse such writes before they reach the database; this is the last line.
 * Returns null for any other error.
 */
export function problemFromDatabase(error: unknown): Problem | null {
  const cause = (error as { cause?: { code?: string; message?: string } }).cause ?? (error as { code?: string; message?: string });
  // Two saves racing to the same unique value (a sample code): the later one is told, nothing of it is kept.
  if (cause?.code === UNIQUE_VIOLATION) {
    return new Problem(409, 'Changed by someone else', 'Someone saved the same value at the same moment; reload and try again. Nothing was saved.');
  }
  if (cause?.code !== CHECK_VIOLATION) return null;
  const message = cause.message ?? '';
  if (/signed and locked|already signed|append-only|is approved and cannot change/i.test(message)) {
    return new Problem(409, 'Locked', `The database refused the change: ${message}. Nothing was saved.`);
  }
  return new Problem(422, 'Invalid data', `The database refused a value: ${message}. Nothing was saved.`);
}

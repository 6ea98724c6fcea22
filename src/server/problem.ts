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

/** Reads a JSON request body, refusing what is not JSON with a clear 400/415. */
export async function readJson(request: Request, maxBytes = 1_000_000): Promise<unknown> {
  const type = request.headers.get('content-type') ?? '';
  if (!type.includes('application/json')) {
    throw new Problem(415, 'Unsupported media type', 'Send the body as application/json.');
  }
  const text = await request.text();
  if (text.length > maxBytes) throw new Problem(413, 'Body too large', `The body is larger than ${maxBytes} bytes.`);
  try {
    return JSON.parse(text);
  } catch (error) {
    throw new Problem(400, 'Malformed JSON', `The body is not valid JSON: ${(error as Error).message}`);
  }
}

/** fetch for the islands: JSON in and out, and problem+json turned into an error that keeps its fields. */
export interface ProblemBody {
  title: string;
  status: number;
  detail: string;
  errors?: { field: string; message: string }[];
  [extra: string]: unknown;
}

export class ApiError extends Error {
  constructor(readonly problem: ProblemBody) {
    super(problem.detail);
    this.name = 'ApiError';
  }
  get status() {
    return this.problem.status;
  }
  fieldError(field: string) {
    return this.problem.errors?.find((e) => e.field === field)?.message;
  }
}

export async function api<T>(method: string, url: string, body?: unknown): Promise<T> {
  const response = await fetch(url, {
    method,
    headers: body === undefined ? {} : { 'content-type': 'application/json' },
    body: body === undefined ? undefined : JSON.stringify(body),
    credentials: 'same-origin',
  });
  if (response.status === 204) return undefined as T;
  const text = await response.text();
  const parsed = text ? JSON.parse(text) : undefined;
  if (!response.ok) {
    throw new ApiError(parsed ?? { title: response.statusText, status: response.status, detail: `The server answered ${response.status}.` });
  }
  return parsed as T;
}

/**
 * An HTTP client with a cookie jar, talking to the app like a browser on its own origin. Used to seed the
 * signed demo study through the real endpoints, and by the integration tests.
 */
export interface HttpSession {
  request(method: string, path: string, body?: unknown, headers?: Record<string, string>): Promise<Response>;
  get(path: string): Promise<Response>;
  post(path: string, body?: unknown): Promise<Response>;
  patch(path: string, body?: unknown): Promise<Response>;
  put(path: string, body?: unknown): Promise<Response>;
  delete(path: string, body?: unknown): Promise<Response>;
  readonly cookie: string;
}

export function createHttpSession(baseUrl: string, initialCookie = ''): HttpSession {
  const jar = new Map<string, string>();
  for (const part of initialCookie.split(';').map((s) => s.trim()).filter(Boolean)) {
    const [name, ...value] = part.split('=');
    jar.set(name, value.join('='));
  }
  const session: HttpSession = {
    get cookie() {
      return [...jar].map(([k, v]) => `${k}=${v}`).join('; ');
    },
    async request(method, path, body, headers = {}) {
      const isJson = body !== undefined && !(body instanceof FormData) && typeof body !== 'string';
      const response = await fetch(`${baseUrl}${path}`, {
        method,
        redirect: 'manual',
        headers: {
          origin: baseUrl,
          ...(isJson ? { 'content-type': 'application/json' } : {}),
          ...(jar.size ? { cookie: session.cookie } : {}),
          ...headers,
        },
        body: body === undefined ? undefined : isJson ? JSON.stringify(body) : (body as BodyInit),
      });
      for (const setCookie of response.headers.getSetCookie()) {
        const [pair, ...attributes] = setCookie.split(';');
        const [name, ...value] = pair.split('=');
        const expired = attributes.some((a) => /max-age=0/i.test(a.trim()));
        if (expired || value.join('=') === '') jar.delete(name.trim());
        else jar.set(name.trim(), value.join('='));
      }
      return response;
    },
    get: (path) => session.request('GET', path),
    post: (path, body) => session.request('POST', path, body),
    patch: (path, body) => session.request('PATCH', path, body),
    put: (path, body) => session.request('PUT', path, body),
    delete: (path, body) => session.request('DELETE', path, body),
  };
  return session;
}

/** Signs in through better-auth's endpoint; throws unless it succeeds. */
export async function signedInSession(baseUrl: string, email: string, password: string): Promise<HttpSession> {
  const session = createHttpSession(baseUrl);
  const response = await session.post('/api/auth/sign-in/email', { email, password });
  if (!response.ok) throw new Error(`sign-in as ${email} failed: ${response.status} ${await response.text()}`);
  return session;
}

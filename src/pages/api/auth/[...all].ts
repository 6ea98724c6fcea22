import type { APIRoute } from 'astro';
import { CLIENT_IP_HEADER, getAuth } from '../../../server/auth';

/** better-auth's own endpoints, with the peer address passed on for per-client rate limits. */
export const ALL: APIRoute = async ({ request, clientAddress }) => {
  const headers = new Headers(request.headers);
  headers.set(CLIENT_IP_HEADER, clientAddress);
  const hasBody = request.method !== 'GET' && request.method !== 'HEAD';
  const forwarded = new Request(request.url, {
    method: request.method,
    headers,
    body: hasBody ? await request.arrayBuffer() : undefined,
  });
  return getAuth().handler(forwarded);
};

import type { APIRoute } from 'astro';
import { checkHealth } from '../../server/health';

export const GET: APIRoute = async () => {
  const health = await checkHealth();
  return new Response(JSON.stringify(health), {
    status: health.status === 'ok' ? 200 : 503,
    headers: { 'content-type': 'application/json', 'cache-control': 'no-store' },
  });
};

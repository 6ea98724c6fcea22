/**
 * The kinds of background job this app runs. Importing a module registers its handler; the middleware starts
 * the workers on the first request, unless RUN_WORKERS is false (an app server that only serves pages).
 */
import { RUN_WORKERS } from 'astro:env/server';
import { startWorkers } from './jobs';
import './analysisJobs';
import './reportJobs';

let ensured = false;

export function ensureWorkers() {
  if (ensured || !RUN_WORKERS) return;
  ensured = true;
  startWorkers().catch((error) => {
    ensured = false;
    console.error('Background workers could not start:', error);
  });
}

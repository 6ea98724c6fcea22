// @ts-check
import { defineConfig, envField } from 'astro/config';
import node from '@astrojs/node';
import react from '@astrojs/react';
import tailwindcss from '@tailwindcss/vite';

// Hosts the app answers as (Astro trusts the Host header only for these). `npm start` builds with the
// deployment's PUBLIC_BASE_URL in the environment, so its host is added here.
const allowedHosts = new Set(['127.0.0.1', 'localhost']);
if (process.env.PUBLIC_BASE_URL) allowedHosts.add(new URL(process.env.PUBLIC_BASE_URL).hostname);

export default defineConfig({
  output: 'server',
  // Several checkouts' builds can live side by side (parallel test runs); the default is dist/.
  outDir: process.env.BIASWISE_BUILD_DIR ?? './dist',
  adapter: node({ mode: 'standalone' }),
  integrations: [react()],
  server: { host: '127.0.0.1', port: 4321 },
  security: { checkOrigin: true, allowedDomains: [...allowedHosts].map((hostname) => ({ hostname })) },
  vite: { plugins: [tailwindcss()] },
  env: {
    schema: {
      DATABASE_URL: envField.string({ context: 'server', access: 'secret' }),
      BETTER_AUTH_SECRET: envField.string({ context: 'server', access: 'secret', min: 32 }),
      /** The address people reach the app at, used in links inside e-mails. */
      PUBLIC_BASE_URL: envField.string({ context: 'server', access: 'secret', default: 'http://127.0.0.1:4321' }),
      SMTP_URL: envField.string({ context: 'server', access: 'secret', default: 'smtp://127.0.0.1:54325' }),
      MAIL_FROM: envField.string({ context: 'server', access: 'secret', default: 'Biaswise <no-reply@biaswise.invalid>' }),
      /** Sign-in attempts one client address may make per minute. */
      SIGN_IN_LIMIT_PER_MINUTE: envField.number({ context: 'server', access: 'secret', default: 30, int: true, gt: 0 }),
      /** Whether this app server also runs the background jobs (bootstrap intervals, report PDFs). */
      RUN_WORKERS: envField.boolean({ context: 'server', access: 'secret', default: true }),
      /** Seconds a job attempt may run before it counts as lost (a killed server) and is retried; short only in fault tests. */
      JOB_EXPIRE_SECONDS: envField.number({ context: 'server', access: 'secret', default: 300, int: true, gt: 0 }),
      /** Folder where the local SMTP fake keeps messages; when set, administrators get a mailbox page. */
      MAIL_CAPTURE_DIR: envField.string({ context: 'server', access: 'secret', optional: true }),
    },
  },
});

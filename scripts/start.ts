/**
 * `npm start`: PostgreSQL (the project's own cluster unless DATABASE_URL is set), migrations, the demo lab
 * when the database is empty, the local SMTP fake, a production build, and the server on 127.0.0.1:4321
 * (scripts/serve.ts: WEB_PROCESSES processes sharing the port).
 * `npm run dev` does the same with Astro's dev server instead of the build.
 */
import { spawn, spawnSync } from 'node:child_process';
import { spawnServer } from './stacks';
import { createDatabase } from '../src/db/client';
import { applyMigrations } from './migrate';
import { DEMO_LAB, DEMO_PASSWORD, DEMO_PEOPLE, isEmpty, seedDemo } from './demo';
import { APP_SMTP_PORT, APP_WEB_PORT, DATA_DIR, ROOT, appDatabaseUrl, authSecret } from './local';
import { seedSignedStudy } from './demo-signed';
import { startSmtpFake } from './smtp-fake';
import { waitForHealth } from './wait-for-health';

const dev = process.argv.includes('--dev');
const host = process.env.HOST ?? '127.0.0.1';
const port = Number(process.env.PORT ?? APP_WEB_PORT);

const databaseUrl = await appDatabaseUrl();
const db = createDatabase(databaseUrl, 2);
await applyMigrations(db);
const seeding = await isEmpty(db);
if (seeding) {
  console.log('Empty database: seeding the demo laboratory …');
  await seedDemo(db);
}
await db.$client.end();

const mailDir = `${DATA_DIR}/mail`;
const smtpUrl = process.env.SMTP_URL;
const smtp = smtpUrl ? null : await startSmtpFake({ port: APP_SMTP_PORT, dir: mailDir });

const env = {
  ...process.env,
  DATABASE_URL: databaseUrl,
  BETTER_AUTH_SECRET: authSecret(),
  PUBLIC_BASE_URL: process.env.PUBLIC_BASE_URL ?? `http://${host}:${port}`,
  SMTP_URL: smtpUrl ?? `smtp://127.0.0.1:${APP_SMTP_PORT}`,
  ...(smtp ? { MAIL_CAPTURE_DIR: mailDir } : {}),
  HOST: host,
  PORT: String(port),
};

if (!dev) {
  console.log('Building the app …');
  const build = spawnSync('npx', ['astro', 'build'], { cwd: ROOT, stdio: 'inherit', env });
  if (build.status !== 0) process.exit(build.status ?? 1);
}

const server = dev
  ? spawn('npx', ['astro', 'dev', '--host', host, '--port', String(port)], { cwd: ROOT, stdio: 'inherit', env })
  : spawnServer(env, 'inherit');

if (seeding) {
  await waitForHealth(`http://${host}:${port}`);
  console.log('Signing the demo study through the app (analysis, bootstrap, sign-off) …');
  await seedSignedStudy(`http://${host}:${port}`);
}

console.log(`
Biaswise is running at http://${host}:${port}
Demo laboratory "${DEMO_LAB.name}" — every account's password is ${DEMO_PASSWORD}
${DEMO_PEOPLE.map((p) => `  ${p.email.padEnd(30)} ${p.role}`).join('\n')}
${smtp ? `E-mail goes to a local capture (SMTP 127.0.0.1:${smtp.port}); administrators read it under Mailbox.` : `E-mail goes to ${smtpUrl}.`}
PostgreSQL keeps running after you stop the app; \`npm run db:stop\` stops it.
`);

const stop = () => {
  server.kill('SIGTERM');
};
process.on('SIGINT', stop);
process.on('SIGTERM', stop);
server.on('exit', async (code) => {
  await smtp?.close();
  process.exit(code ?? 0);
});

/** `npm run db:start`, `npm run db:stop` and `npm run seed`. */
import { createDatabase } from '../src/db/client';
import { applyMigrations } from './migrate';
import { isEmpty, seedDemo } from './demo';
import { APP_CLUSTER_DIR, appDatabaseUrl } from './local';
import { stopCluster } from './postgres';

const command = process.argv[2];

if (command === 'stop') {
  if (process.env.DATABASE_URL) {
    console.log('DATABASE_URL is set: that server is not ours to stop.');
  } else {
    console.log(stopCluster(APP_CLUSTER_DIR) ? 'PostgreSQL stopped.' : 'PostgreSQL was not running.');
  }
} else if (command === 'start' || command === 'seed') {
  const db = createDatabase(await appDatabaseUrl(), 2);
  await applyMigrations(db);
  if (command === 'seed') {
    if (await isEmpty(db)) {
      await seedDemo(db);
      console.log('Demo laboratory seeded.');
    } else {
      console.log('The database already has laboratories: the demo is not seeded twice.');
    }
  } else {
    console.log('PostgreSQL is running and migrated.');
  }
  await db.$client.end();
} else {
  console.error('usage: tsx scripts/db.ts start | stop | seed');
  process.exit(2);
}

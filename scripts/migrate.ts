// Applies the committed SQL migrations in drizzle/ to DATABASE_URL. Used by npm start, npm test and
// production deploys (npm run migrate).
import { migrate } from 'drizzle-orm/postgres-js/migrator';
import { existsSync } from 'node:fs';
import { createDb } from '../src/lib/server/db';

if (!process.env.DATABASE_URL && existsSync('.env')) process.loadEnvFile('.env');
const url = process.env.DATABASE_URL;
if (!url) {
  console.error('migrate: DATABASE_URL is not set');
  process.exit(1);
}
const db = createDb(url, { max: 1 });
await migrate(db, { migrationsFolder: new URL('../drizzle', import.meta.url).pathname });
await db.$client.end();
console.log('migrate: database is up to date');

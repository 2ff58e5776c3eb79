// Seeds the demo: one user per role (password from DEMO_PASSWORD) and, unless --users-only, the invented
// demo scenario (arm models, units, sessions …) from scripts/demo-scenario.ts. Idempotent.
import { existsSync } from 'node:fs';
import { createDb } from '../src/lib/server/db';
import { upsertUserWithPassword } from '../src/lib/server/users';
import type { Role } from '../src/lib/shared/roles';

if (!process.env.DATABASE_URL && existsSync('.env')) process.loadEnvFile('.env');
if (process.env.OFFSETRY_MODE === 'production') {
  console.error('seed: refused — demo accounts are never created in production mode.');
  process.exit(1);
}
const password = process.env.DEMO_PASSWORD || 'offsetry-demo';
const db = createDb(process.env.DATABASE_URL!, { max: 2 });

export const DEMO_USERS: { email: string; name: string; roles: Role[] }[] = [
  { email: 'technician@example.com', name: 'Tomás Reyes', roles: ['technician'] },
  { email: 'engineer@example.com', name: 'Ines Kowalczyk', roles: ['engineer'] },
  { email: 'engineer2@example.com', name: 'Dara Okafor', roles: ['engineer'] },
  { email: 'quality@example.com', name: 'Hanna Lind', roles: ['quality'] },
  { email: 'service@example.com', name: 'Marco Benedetti', roles: ['service'] },
  { email: 'admin@example.com', name: 'Priya Raman', roles: ['admin'] },
];

for (const u of DEMO_USERS) await upsertUserWithPassword({ ...u, password, isDemo: true }, db);
console.log(`seed: ${DEMO_USERS.length} demo users ready`);

if (!process.argv.includes('--users-only')) {
  const scenario = new URL('./demo-scenario.ts', import.meta.url);
  if (existsSync(scenario)) {
    const mod = (await import(scenario.href)) as { seedScenario: (db: ReturnType<typeof createDb>) => Promise<string>; UNITS: { serial: string }[] };
    console.log('seed: ' + (await mod.seedScenario(db)));
    const history = (await import(new URL('./demo-history.ts', import.meta.url).href)) as typeof import('./demo-history');
    console.log('seed: ' + (await history.seedHistory(db, mod.UNITS.map((u) => u.serial))));
    console.log('seed: ' + (await (await import(new URL('./demo-compensation.ts', import.meta.url).href)).seedCompensation(db)));
  }
}
await db.$client.end();

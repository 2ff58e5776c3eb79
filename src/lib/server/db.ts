import { drizzle } from 'drizzle-orm/postgres-js';
import postgres from 'postgres';
import * as schema from '../../db/schema';
import { config } from './config';

export type Db = ReturnType<typeof createDb>;

export function createDb(url: string, options: { max?: number } = {}) {
  const client = postgres(url, {
    max: options.max ?? 10,
    // Fail fast when PostgreSQL is away so requests answer 503 instead of hanging.
    connect_timeout: 5,
    // postgres.js waits before reconnecting after a failed connection, growing to 20 s by default (3^n/100 s);
    // during a database outage every request would then wait that long for its 503. Cap it at 1 s.
    backoff: (retries: number) => Math.min(0.05 * 2 ** retries, 1),
    idle_timeout: 30,
    onnotice: () => {},
  });
  return drizzle(client, { schema, casing: 'snake_case' });
}

let shared: Db | undefined;

/** The process-wide database handle (repositories also accept a handle as a parameter for tests). */
export function db(): Db {
  shared ??= createDb(config().DATABASE_URL);
  return shared;
}

export { schema };

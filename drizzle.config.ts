import { defineConfig } from 'drizzle-kit';
import { existsSync } from 'node:fs';

// drizzle-kit does not read .env by itself.
if (!process.env.DATABASE_URL && existsSync('.env')) process.loadEnvFile('.env');

export default defineConfig({
  dialect: 'postgresql',
  schema: './src/db/schema/index.ts',
  out: './drizzle',
  casing: 'snake_case',
  dbCredentials: { url: process.env.DATABASE_URL ?? 'postgres://offsetry@127.0.0.1:54329/offsetry' },
});

#!/usr/bin/env node
// `npm run serve`: the built app (after `npm run build`) with the runtime environment only.
//
// Production runs this way: every setting comes from environment variables (the built server reads no .env
// file, and nothing secret is baked into dist/). Before the server starts, the configuration is checked with
// the same zod schema the app uses (src/lib/server/config.ts); every missing or malformed variable is listed
// and the exit code is 78 (EX_CONFIG, sysexits.h) so a supervisor does not restart in a loop without a reason.
// The app checks again on its first request (src/middleware.ts), for deployments that start entry.mjs directly.
//
//   npm run serve                        serve ./dist (or $OFFSETRY_OUT_DIR) on $HOST:$PORT
//   npm run serve -- --check             check the configuration and exit (0 when it is complete)
//   node --env-file=prod.env scripts/serve.mjs   one way to hand it a file of variables explicitly
import { spawn } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const EX_CONFIG = 78;
const args = process.argv.slice(2);
const checkOnly = args.includes('--check');
const unknown = args.filter((a) => a !== '--check');
if (unknown.length) {
  console.error(`serve: unknown option ${unknown.join(' ')} (known: --check)`);
  process.exit(2);
}

/** The app's own check (TypeScript source, loaded through tsx, so the schema exists only once). */
async function configProblems() {
  const { tsImport } = await import('tsx/esm/api');
  const mod = await tsImport(pathToFileURL(path.join(root, 'src/lib/server/config.ts')).href, import.meta.url);
  return /** @type {string[]} */ (mod.configProblems(process.env));
}

const problems = await configProblems();
if (problems.length) {
  console.error(
    [
      `serve: the configuration is incomplete (${problems.length} problem${problems.length === 1 ? '' : 's'}); the server was not started:`,
      ...problems.map((p) => `  - ${p}`),
      'Set these environment variables (see the README, "Operations") and start again.',
    ].join('\n'),
  );
  process.exit(EX_CONFIG);
}
const mode = process.env.OFFSETRY_MODE || 'demo';
if (checkOnly) {
  console.log(`serve: configuration complete (OFFSETRY_MODE=${mode})`);
  process.exit(0);
}

const outDir = path.resolve(root, process.env.OFFSETRY_OUT_DIR || 'dist');
const entry = path.join(outDir, 'server', 'entry.mjs');
if (!fs.existsSync(entry)) {
  console.error(`serve: ${path.relative(root, entry)} does not exist; run \`npm run build\` first.`);
  process.exit(1);
}

// The child gets exactly our environment; signals are passed on so a supervisor's SIGTERM reaches the app
// (which lets a running fit finish or hands it back to the queue).
const child = spawn(process.execPath, [entry], { stdio: 'inherit', env: process.env, cwd: root });
for (const signal of /** @type {const} */ (['SIGINT', 'SIGTERM', 'SIGHUP'])) {
  process.on(signal, () => child.kill(signal));
}
child.once('exit', (code, signal) => process.exit(code ?? (signal ? 128 + (signal === 'SIGTERM' ? 15 : signal === 'SIGINT' ? 2 : 1) : 1)));

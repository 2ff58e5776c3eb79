#!/usr/bin/env node
// npm run bench: prints figures; never fails on a target (targets are printed beside the figures).
//   engine — fit time at 60 / 500 / 5 000 / 20 000 poses, beside ml-levenberg-marquardt and SciPy
//   ik     — compensation of a 10 000-target program (targets/second), beside SciPy least_squares
//   load   — HTTP load against a seeded app (scripts/bench-load.mjs), when present
//   certificate — time to draw a calibration certificate and its accuracy map
//   scale  — upload, fit, pages and APIs at 1 000 / 10 000 / 100 000 poses (scripts/bench-scale.ts)
//   fleet  — fleet statistics, drift, unit list and export log under 20 clients at 100 / 1 000 / 10 000 units,
//            the first statistics computation and a 1 000-unit batch export (scripts/bench-fleet.ts)
// Pass a name to run one: npm run bench -- engine
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';

const only = process.argv[2];
const parts = [
  { name: 'engine', cmd: ['npx', 'tsx', 'scripts/bench-engine.ts'] },
  { name: 'ik', cmd: ['npx', 'tsx', 'scripts/bench-ik.ts'] },
  { name: 'load', cmd: ['node', 'scripts/bench-load.mjs'], file: 'scripts/bench-load.mjs' },
  { name: 'certificate', cmd: ['npx', 'tsx', 'scripts/bench-certificate.ts'] },
  { name: 'scale', cmd: ['npx', 'tsx', 'scripts/bench-scale.ts'], file: 'scripts/bench-scale.ts' },
  { name: 'fleet', cmd: ['npx', 'tsx', 'scripts/bench-fleet.ts', ...process.argv.slice(3)], file: 'scripts/bench-fleet.ts' },
];
let status = 0;
for (const p of parts) {
  if (only && p.name !== only) continue;
  if (p.file && !existsSync(p.file)) continue;
  console.log(`\n=== bench: ${p.name} ===`);
  const r = spawnSync(p.cmd[0], p.cmd.slice(1), { stdio: 'inherit' });
  if (r.status !== 0) status = r.status ?? 1;
}
process.exit(status);

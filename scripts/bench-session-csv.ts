/**
 * Benchmark of the session CSV parser (prints figures; not a test): a 100 000-row six-axis session
 * read from a file stream and from a string, next to csv-parse alone on the same bytes (the floor).
 * Run: npx tsx scripts/bench-session-csv.ts [rows]
 */
import { createReadStream, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { parse } from 'csv-parse';
import { parseSessionCsv, sessionToCsv } from '../src/lib/engine/session-csv';
import type { ArmGeometry, SessionPose } from '../src/lib/engine/types';

const rows = Number(process.argv[2] ?? 100_000);
const geometry: ArmGeometry = {
  format: 'offsetry-arm/1',
  name: 'bench arm',
  convention: 'mdh',
  joints: Array.from({ length: 6 }, (_, k) => ({ name: `J${k + 1}`, type: 'revolute' as const, a: 0, alpha: 0, d: 0, theta: 0, min: -180, max: 180 })),
};
let s = 1;
const rnd = () => ((s = (s * 16807) % 2147483647) / 2147483647);
const poses: SessionPose[] = Array.from({ length: rows }, (_, i) => ({
  label: `P${i + 1}`,
  line: i + 2,
  q: Array.from({ length: 6 }, () => Number((rnd() * 340 - 170).toFixed(3))),
  x: Number((rnd() * 2000).toFixed(4)),
  y: Number((rnd() * 2000 - 1000).toFixed(4)),
  z: Number((rnd() * 1500).toFixed(4)),
}));
const text = sessionToCsv(poses, 6);
const dir = mkdtempSync(join(tmpdir(), 'offsetry-bench-'));
const file = join(dir, 'session.csv');
writeFileSync(file, text);

async function time(label: string, f: () => Promise<unknown>) {
  const ms: number[] = [];
  for (let k = 0; k < 5; k++) {
    const t = performance.now();
    await f();
    ms.push(performance.now() - t);
  }
  ms.sort((a, b) => a - b);
  console.log(`${label.padEnd(38)} min ${ms[0].toFixed(0).padStart(5)} ms   median ${ms[2].toFixed(0).padStart(5)} ms`);
}

console.log(`session CSV: ${rows} rows, ${(Buffer.byteLength(text) / 1048576).toFixed(1)} MiB`);
await time('csv-parse alone (file stream)', async () => {
  let n = 0;
  await new Promise<void>((resolve, reject) => {
    createReadStream(file).pipe(parse({ relax_column_count: true })).on('data', () => n++).on('end', resolve).on('error', reject);
  });
});
await time('parseSessionCsv (file stream)', async () => {
  const r = await parseSessionCsv(createReadStream(file), { fileName: file, geometry });
  if (!r.ok || r.poses.length !== rows) throw new Error('bench parse failed');
});
await time('parseSessionCsv (string)', async () => {
  const r = await parseSessionCsv(text, { fileName: file, geometry });
  if (!r.ok || r.poses.length !== rows) throw new Error('bench parse failed');
});
rmSync(dir, { recursive: true, force: true });

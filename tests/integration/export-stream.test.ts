/**
 * The batch export streams: exporting 1 000 units must not hold the zip (or its files) in memory. The export
 * runs in this process against the real database, its stream is written to a file while the heap and
 * buffers outside it are sampled after garbage collection at every block read; the growth from 200 to
 * 1 000 units, per unit, may exceed what archiver alone keeps for the same number of entries (measured the same
 * way) only by the batch's list of units: nothing per file, and not the manifest's lists. The zip is read
 * back with Info-ZIP's unzip. Certificates are left out here (drawing 1 200 of them takes minutes on a small
 * machine; the batch test in exports.test.ts covers them, and the benchmark measures a full export).
 */
import { execFileSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import v8 from 'node:v8';
import vm from 'node:vm';
import archiver from 'archiver';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb } from '../../src/lib/server/db';
import { exportBatch } from '../../src/lib/server/exports';
import { seedFleet, type FleetFixture } from '../../scripts/fleet-fixture';
import { userId } from '../support/approved-sets';
import { DEMO, signedIn, uniq } from '../support/http';

const db = createDb(process.env.DATABASE_URL!, { max: 4 });
const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'offsetry-export-stream-'));
afterAll(async () => {
  await db.$client.end();
  fs.rmSync(dir, { recursive: true, force: true });
});

const MB = 1024 * 1024;
// What the export keeps, not what it has allocated and not yet collected: memory is read after a full
// garbage collection (V8's gc, exposed for this measurement).
v8.setFlagsFromString('--expose-gc');
const gc = vm.runInNewContext('gc') as () => void;
const used = () => {
  gc();
  const m = process.memoryUsage();
  return m.heapUsed + m.external;
};

/** Export `serials`, writing the stream to a file; the peak growth of heap + external memory (after collection) over the start. */
async function exportToFile(serials: string[], file: string, actor: { id: string; name: string; email: string }) {
  const start = used();
  let peak = start;
  const result = await exportBatch(serials, actor, db, { certificates: false });
  if (!result.ok) throw new Error(`export refused: ${JSON.stringify(result)}`);
  const out = fs.createWriteStream(file);
  const reader = result.stream.getReader();
  for (;;) {
    const { done, value } = await reader.read();
    if (done) break;
    // Every block (about 64 KiB each, so a few dozen collections for a 5 MB zip).
    peak = Math.max(peak, used());
    if (!out.write(value)) await new Promise<void>((r) => out.once('drain', () => r()));
  }
  await new Promise<void>((r, j) => out.end((err?: Error | null) => (err ? j(err) : r())));
  await result.done;
  return { growth: peak - start, bytes: fs.statSync(file).size };
}

/**
 * The same measurement for archiver alone: `entries` small files (about the size of a unit's files) zipped one
 * after another, the output counted and dropped as it comes, sampled at every 64 KiB of it. What grows here is
 * the library's own: its record of each entry, kept for the central directory that the zip format writes at
 * the end, and that directory written at once.
 */
async function archiverAlone(entries: number) {
  const start = used();
  let peak = start;
  const archive = archiver('zip', { zlib: { level: 6 } });
  let bytes = 0;
  let sampledAt = 0;
  archive.on('data', (c: Buffer) => {
    bytes += c.length;
    if (bytes - sampledAt >= 64 * 1024) {
      sampledAt = bytes;
      peak = Math.max(peak, used());
    }
  });
  const ended = new Promise((r) => archive.once('end', r));
  const content = Buffer.from(JSON.stringify({ joints: Array.from({ length: 40 }, (_, i) => ({ a: i * 1.234567, d: i * 0.98765 })) }));
  for (let i = 0; i < entries; i++) {
    const entry = new Promise((r) => archive.once('entry', r));
    archive.append(Buffer.concat([content, Buffer.from(String(i))]), { name: `XSLIBRARY0000-R6-${String(i >> 2).padStart(5, '0')}/file-${i % 4}.json` });
    await entry;
  }
  await archive.finalize();
  await ended;
  peak = Math.max(peak, used());
  return peak - start;
}

describe('batch export streaming', () => {
  let fleet: FleetFixture;
  let actor: { id: string; name: string; email: string };

  beforeAll(async () => {
    fleet = await seedFleet(db.$client, { units: 1000, seed: 11, prefix: uniq('XS'), exportLog: 0 });
    actor = { id: await userId(db, DEMO.service), name: 'Service Manager', email: DEMO.service };
  }, 120_000);

  it('keeps per unit only what archiver keeps for the zip directory plus the list of units, from 200 to 1 000 units, and writes a zip unzip reads', async () => {
    // A first export loads and compiles the code paths, so the measured runs do not count that.
    await exportToFile(fleet.serials.slice(0, 200), path.join(dir, 'warm.zip'), actor);
    const small = await exportToFile(fleet.serials.slice(0, 200), path.join(dir, 'small.zip'), actor);
    const large = await exportToFile(fleet.serials, path.join(dir, 'large.zip'), actor);
    console.log(`batch export: 200 units ${(small.bytes / MB).toFixed(1)} MB, memory +${(small.growth / MB).toFixed(1)} MB; 1 000 units ${(large.bytes / MB).toFixed(1)} MB, memory +${(large.growth / MB).toFixed(1)} MB`);
    // The large zip is ~5× the small one; the files are not kept, and neither are the top-level manifest.json
    // and SHA256SUMS (each unit's part of them is spilled to a temporary file and streamed back at the end).
    // What grows with the units is archiver's own record of each zip entry, kept for the central directory the
    // zip format writes last (measured below on archiver alone: 1.5–1.7 KiB a unit of four entries), and the
    // batch's list of units and set ids. Measured here 2.3–2.4 KiB a unit at the peak (it was 4.9 KiB while a
    // paused archive held the central directory as archiver writes it, about 17 tiny buffers an entry; 7 KiB
    // with the manifest's lists in memory; 20 KiB while the stream's queue held archiver's small chunks as
    // views into larger buffers).
    expect(large.bytes).toBeGreaterThan(4 * small.bytes);
    const perUnit = (large.growth - small.growth) / 800;
    // What of that is archiver's own, measured the same way with four entries a unit: the rest is ours.
    await archiverAlone(800);
    const libSmall = await archiverAlone(4 * 200);
    const libLarge = await archiverAlone(4 * 1000);
    const libPerUnit = (libLarge - libSmall) / 800;
    console.log(`batch export: ${(perUnit / 1024).toFixed(1)} KiB a unit; archiver alone with four entries a unit ${(libPerUnit / 1024).toFixed(1)} KiB`);
    expect(libPerUnit).toBeGreaterThan(0);
    // Ours beyond the library's: the list of units (serial, ids) and nothing per file.
    expect(perUnit - libPerUnit).toBeLessThan(1.5 * 1024);
    expect(perUnit).toBeLessThan(4 * 1024);
    expect(large.growth).toBeLessThan(8 * MB);

    // Read back with an outside reader: one folder per unit with its four files, plus manifest.json and SHA256SUMS.
    const listing = execFileSync('unzip', ['-Z1', path.join(dir, 'large.zip')], { encoding: 'utf8', maxBuffer: 64 * MB }).trim().split('\n');
    expect(listing).toHaveLength(1000 * 4 + 2);
    expect(listing).toContain('manifest.json');
    expect(listing).toContain('SHA256SUMS');
    const serial = fleet.serials[777]!;
    expect(listing.filter((p) => p.startsWith(`${serial}/`)).sort()).toEqual([`${serial}/geometry.json`, `${serial}/manifest.json`, `${serial}/parameters.csv`, `${serial}/robot.urdf`]);
    const geometry = JSON.parse(execFileSync('unzip', ['-p', path.join(dir, 'large.zip'), `${serial}/geometry.json`], { encoding: 'utf8' }));
    const [stored] = await db.$client`select ps.geometry, ps.version from parameter_sets ps join units u on u.id = ps.unit_id where u.serial = ${serial} and ps.state = 'current'`;
    expect(stored!.version).toBe(5);
    expect(geometry.joints).toEqual(stored!.geometry.joints);
    expect(geometry.metadata.serial).toBe(serial);
    // Every file's digest as SHA256SUMS states it (`sha256sum -c` in the unpacked folder).
    const unpacked = path.join(dir, 'unpacked');
    execFileSync('unzip', ['-q', path.join(dir, 'large.zip'), '-d', unpacked]);
    const check = execFileSync('sha256sum', ['--quiet', '-c', 'SHA256SUMS'], { cwd: unpacked, encoding: 'utf8' });
    expect(check.trim()).toBe('');
    const sums = fs.readFileSync(path.join(unpacked, 'SHA256SUMS'), 'utf8').trim().split('\n');
    expect(sums).toHaveLength(1000 * 4 + 1);
    expect(sums.at(-1)).toMatch(/^[0-9a-f]{64}  manifest\.json$/);
    // The top-level manifest, streamed from the spilled unit entries, is what writing it whole would give:
    // JSON.parse reads it, and JSON.stringify(…, null, 2) of what it read gives back the same bytes.
    const manifestText = fs.readFileSync(path.join(unpacked, 'manifest.json'), 'utf8');
    const manifest = JSON.parse(manifestText);
    expect(manifestText).toBe(JSON.stringify(manifest, null, 2) + '\n');
    expect(Object.keys(manifest)).toEqual(['format', 'exportedAt', 'exportedBy', 'units', 'safety']);
    expect(manifest.units.map((u: { serial: string }) => u.serial)).toEqual(fleet.serials);
    expect(manifest.units[777].files.map((f: { path: string }) => f.path)).toContain(`${serial}/manifest.json`);
  }, 300_000);

  it('the exports page sends one page of units at fleet size, not every exportable unit', async () => {
    const service = await signedIn(DEMO.service);
    const res = await service.fetch('/exports');
    expect(res.status).toBe(200);
    const html = await res.text();
    // This fleet alone has 1 000 exportable units (the shared test database more); the page holds 50 rows
    // and their data. Before the picker paged on the server it carried every unit, ~190 bytes each, twice
    // (the rows and the island's props).
    expect((html.match(/data-export-unit=/g) ?? []).length).toBe(50);
    expect(html.length).toBeLessThan(200 * 1024);
    console.log(`exports page: ${(html.length / 1024).toFixed(0)} kB`);
  });

  it('stops cleanly when the client stops reading: the export settles and its temporary files are removed', async () => {
    // The spill directories of this test's exports: the ones whose unit list names this fleet's serials.
    const prefix = fleet.serials[0]!.split('-')[0]!;
    const ours = () =>
      fs
        .readdirSync(os.tmpdir())
        .filter((d) => d.startsWith('offsetry-export-') && !d.startsWith('offsetry-export-stream-'))
        .filter((d) => {
          try {
            return fs.readFileSync(path.join(os.tmpdir(), d, 'units.json'), 'utf8').includes(prefix);
          } catch {
            return false;
          }
        });
    const result = await exportBatch(fleet.serials.slice(0, 600), actor, db, { certificates: false });
    if (!result.ok) throw new Error('export refused');
    const reader = result.stream.getReader();
    let read = 0;
    while (read < 256 * 1024) read += (await reader.read()).value!.byteLength;
    expect(ours()).toHaveLength(1);
    await reader.cancel();
    await result.done;
    expect(ours()).toEqual([]);
  });

  it('is logged once per export with every unit, and refuses more than 10 000 units naming the field', async () => {
    const [row] = await db.$client`select items from export_log where kind = 'batch' and items @> ${JSON.stringify([{ serial: fleet.serials[999] }])}::jsonb order by at desc limit 1`;
    expect(row!.items).toHaveLength(1000);
    const service = await signedIn(DEMO.service);
    const res = await service.json('/api/exports', { method: 'POST', json: { serials: Array.from({ length: 10_001 }, (_, i) => `X-${i}`) } });
    expect(res.status).toBe(400);
    expect(res.body.errors.map((e: { field: string }) => e.field)).toContain('serials');
  });
});

/**
 * The calibration certificate of a demo parameter set (seeded through the real fit and review path), read
 * back with tools from outside the project: pdftotext / pdffonts / pdftoppm from Debian's poppler-utils.
 * Every section and number is checked against the database; the same set gives byte-identical PDFs.
 */
import { execFileSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { and, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { seedScenario } from '../../scripts/demo-scenario';
import { seedHistory } from '../../scripts/demo-history';
import { fits, parameterSets, sessionPoses, sessions, units, users } from '../../src/db/schema';
import type { FitReportSummary } from '../../src/lib/shared/fit-summary';
import { iso9283, repeatGroups } from '../../src/lib/engine/iso9283';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { fmtMm, fmtSe, fmtValue } from '../../src/lib/server/certificate-pdf';
import { createDb } from '../../src/lib/server/db';
import { SAFETY_CAUTION } from '../../src/lib/shared/safety';
import { DEMO, signedIn, type Client } from '../support/http';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
afterAll(() => db.$client.end());
const SERIAL = 'LCS-S4-0203';
const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');
/** pdftotext's text with runs of white space made single spaces. */
const flat = (s: string) => s.replace(/\s+/g, ' ').trim();
/** Without any white space: line breaks (also after a dash) and column gaps do not matter for a comparison. */
const tight = (s: string) => s.replace(/\s+/g, '');

describe('calibration certificate', () => {
  let quality: Client, service: Client;
  let setId: string;
  let pdf: Uint8Array;
  let text: string;
  const dir = mkdtempSync(path.join(tmpdir(), 'offsetry-cert-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  beforeAll(async () => {
    // The scenario is idempotent; a parallel seeding of the same rows (the demo-scenario test) may collide once.
    try {
      await seedScenario(db);
    } catch {
      await seedScenario(db);
    }
    await seedHistory(db, [SERIAL]);
    const [row] = await db
      .select({ id: parameterSets.id })
      .from(parameterSets)
      .innerJoin(units, eq(units.id, parameterSets.unitId))
      .where(and(eq(units.serial, SERIAL), eq(parameterSets.state, 'current')));
    setId = row!.id;
    [quality, service] = await Promise.all([signedIn(DEMO.quality), signedIn(DEMO.service)]);
  }, 300_000);

  it('is served as a PDF, byte-identical each time, with embedded Source Sans 3 fonts', async () => {
    const res = await quality.fetch(`/api/parameter-sets/${setId}/certificate`);
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toBe('application/pdf');
    pdf = new Uint8Array(await res.arrayBuffer());
    expect(res.headers.get('x-content-sha256')).toBe(sha(pdf));
    const again = new Uint8Array(await (await service.fetch(`/api/parameter-sets/${setId}/certificate`)).arrayBuffer());
    expect(sha(again)).toBe(sha(pdf));
    writeFileSync(path.join(dir, 'c.pdf'), pdf);
    // pdffonts: every font embedded, all of them Source Sans 3.
    const fonts = execFileSync('pdffonts', ['c.pdf'], { cwd: dir }).toString().trim().split('\n').slice(2);
    expect(fonts.length).toBeGreaterThanOrEqual(2);
    for (const f of fonts) {
      expect(f).toMatch(/SourceSans3/);
      expect(f).toMatch(/\byes\b/);
    }
    // -layout keeps each table row on one line (the reading order of right-aligned columns otherwise varies).
    text = flat(execFileSync('pdftotext', ['-layout', '-enc', 'UTF-8', 'c.pdf', '-'], { cwd: dir }).toString());
    // The first page as PNG, for a person to look at (kept under tmp/ in the repository, git-ignored).
    execFileSync('pdftoppm', ['-png', '-r', '80', '-f', '1', '-l', '1', '-singlefile', 'c.pdf', 'page1'], { cwd: dir });
    expect(statSync(path.join(dir, 'page1.png')).size).toBeGreaterThan(20_000);
    const keep = path.join(process.cwd(), 'tmp');
    mkdirSync(keep, { recursive: true });
    writeFileSync(path.join(keep, 'certificate-page1.png'), readFileSync(path.join(dir, 'page1.png')));
  });

  it('states every section and number as the database has it', async () => {
    const [s] = await db.select().from(parameterSets).where(eq(parameterSets.id, setId));
    const [f] = await db.select().from(fits).where(eq(fits.id, s!.fitId));
    const [session] = await db.select().from(sessions).where(eq(sessions.id, f!.sessionId));
    const report = f!.report as unknown as FitReportSummary;
    const name = async (id: string | null) => (await db.select({ name: users.name }).from(users).where(eq(users.id, id!)))[0]!.name;
    const year = s!.approvedAt.getUTCFullYear();
    const certNo = `OC-${year}-${String(s!.certificateNo).padStart(6, '0')}`;

    for (const heading of ['Calibration certificate', 'Unit', 'Measurement session', 'Method', 'Results', 'Residual per pose, before and after calibration', 'Accuracy map', 'Parameters', 'Approvals', 'Exported files of this parameter set (SHA-256)', 'Safety']) {
      expect(tight(text), heading).toContain(tight(heading));
    }
    expect(tight(text)).toContain(tight(`Certificate number ${certNo}`));
    const pages = Number(/Page 1 of (\d+)/.exec(text)![1]);
    expect(pages).toBeGreaterThanOrEqual(2);
    for (let p = 1; p <= pages; p++) expect(tight(text)).toContain(tight(`Page ${p} of ${pages}`));

    // Unit, model, site as frozen at approval.
    expect(tight(text)).toContain(tight(`Serial number ${SERIAL}`));
    expect(tight(text)).toContain(tight(`${s!.frozen!.modelName} (${s!.frozen!.manufacturer}), revision r${s!.frozen!.revision}`));
    expect(tight(text)).toContain(tight(`Customer site ${s!.frozen!.site}`));
    expect(tight(text)).toContain(tight(`v${s!.version} (${setId})`));

    // Session.
    expect(tight(text)).toContain(tight(`Measured on ${session!.measuredOn}`));
    expect(tight(text)).toContain(tight(`Technician ${session!.technician}`));
    expect(tight(text)).toContain(tight(`Instrument ${session!.instrument}`));
    // The demo's sessions carry their tracker's stated uncertainty; the certificate prints it as recorded.
    expect(session!.instrumentUncertainty).not.toBe('');
    expect(tight(text)).toContain(tight(`Stated uncertainty ${session!.instrumentUncertainty}`));
    if (session!.ambientC !== null) expect(tight(text)).toContain(tight(`Ambient temperature ${session!.ambientC.toFixed(1)} °C`));
    expect(tight(text)).toContain(tight(`Session file SHA-256 ${session!.fileSha256}`));
    expect(tight(text)).toContain(tight(`Poses ${session!.poseCount}`));

    // Method: convention, counts, registration.
    expect(tight(text)).toContain(tight(report.convention === 'dh' ? 'Denavit–Hartenberg (DH)' : 'modified Denavit–Hartenberg'));
    const identified = report.parameters.filter((p) => p.status === 'identified').length;
    expect(tight(text)).toContain(tight(`${identified} parameters were identified by Levenberg–Marquardt`));
    expect(tight(text)).toContain(tight(`${report.poseSummary.fit} poses were fitted`));
    // Fixed parameters with their reasons (a reason may wrap inside its table cell: compare the words).
    const words = (x: string) => x.replace(/[^\p{L}\p{N}]+/gu, ' ').trim();
    for (const p of report.parameters.filter((x) => x.status === 'fixed')) {
      expect(tight(text)).toContain(tight(p.key));
      expect(words(text), p.key).toContain(words(p.reason!).split(' ').slice(0, 4).join(' '));
    }
    expect(tight(text)).toContain(tight('change = calibrated − nominal'));

    // Results: before / after, fitted and held-out.
    const st = report.statistics;
    const row = (label: string, x: { n: number; rms: number; mean: number; max: number; p95: number }) => `${label} ${x.n} ${fmtMm(x.rms)} ${fmtMm(x.mean)} ${fmtMm(x.max)} ${fmtMm(x.p95)}`;
    expect(tight(text)).toContain(tight(row('Fitted poses, before (nominal)', st.fit.before)));
    expect(tight(text)).toContain(tight(row('Fitted poses, after (calibrated)', st.fit.after)));
    expect(st.holdout).not.toBeNull();
    expect(tight(text)).toContain(tight(row('Held-out poses, before (nominal)', st.holdout!.before)));
    expect(tight(text)).toContain(tight(row('Held-out poses, after (calibrated)', st.holdout!.after)));
    expect(tight(text)).toContain(tight(st.crossValidation ? `${st.crossValidation.k}-fold` : 'Cross-validation not run for this fit'));

    // ISO 9283 from the session's repeated poses (computed here from the stored poses).
    const poses = await db.select().from(sessionPoses).where(eq(sessionPoses.sessionId, session!.id)).orderBy(sessionPoses.idx);
    const calibrated = s!.geometry;
    const after = iso9283(repeatGroups(poses, (q) => forwardPoint(calibrated, q)));
    expect(after.poses.length).toBe(session!.repeatGroups);
    expect(tight(text)).toContain(tight(`${after.poses.length} repeated poses. Accuracy AP (worst pose ${after.apPose}):`));
    expect(tight(text)).toContain(tight(`${fmtMm(after.ap)} mm after; repeatability RP (worst pose ${after.rpPose}): ${fmtMm(after.rp)} mm`));

    // Parameter table: every parameter with calibrated value, change and standard error.
    for (const p of report.parameters) {
      expect(tight(text), p.key).toContain(tight(`${p.key} `));
      expect(tight(text), p.key).toContain(tight(`${fmtValue(p.nominal, p.unit)} ${fmtValue(p.calibrated, p.unit)} ${fmtValue(p.change, p.unit)} ${fmtSe(p.standardError)}`));
    }

    // Approvals and four eyes (the demo's runner and approver are two engineers).
    const runBy = await name(f!.createdBy), approver = await name(s!.approvedBy);
    expect(tight(text)).toContain(tight(`Fit run by ${runBy}`));
    expect(tight(text)).toContain(tight(`Approved by ${approver}, ${s!.approvedAt.toISOString().slice(0, 10)}`));
    expect(tight(text)).toContain(tight(`Four-eyes rule: met — ${approver} approved; the fit was run by ${runBy}`));

    // SHA-256 of every exported file: the same digests the export route serves.
    for (const fmt of ['json', 'csv', 'urdf']) {
      const res = await service.fetch(`/api/parameter-sets/${setId}/export?format=${fmt}`);
      const digest = res.headers.get('x-content-sha256')!;
      expect(tight(text), fmt).toContain(tight(digest));
    }

    // Accuracy map: the scale stated is the one the map API computes.
    const map = await quality.json(`/api/parameter-sets/${setId}/accuracy-map`);
    expect(map.status).toBe(200);
    expect(tight(text)).toContain(tight(`Scale 0 to ${fmtMm(map.body.scaleMaxMm)} mm`));
    expect(tight(text)).toContain(tight(`mean ${fmtMm(map.body.meanMm)} mm, largest ${fmtMm(map.body.maxMm)} mm`));

    expect(tight(text)).toContain(tight(flat(SAFETY_CAUTION)));
  });

  it('is listed in the export log and refused to technicians', async () => {
    const log = await quality.json('/api/exports?pageSize=200');
    const mine = log.body.entries.filter((e: { format: string; items: { parameterSetId: string }[] }) => e.format === 'certificate' && e.items[0]?.parameterSetId === setId);
    expect(mine.length).toBeGreaterThanOrEqual(2);
    const tech = await signedIn(DEMO.technician);
    expect((await tech.json(`/api/parameter-sets/${setId}/certificate`)).status).toBe(403);
    expect((await quality.json('/api/parameter-sets/00000000-0000-4000-8000-000000000000/certificate')).status).toBe(404);
  });
});

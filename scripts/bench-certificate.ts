/**
 * Certificate benchmark (npm run bench -- certificate): time to draw one calibration certificate (PDF with the
 * 40 000-sample accuracy map) and the accuracy map alone, for an invented six-axis arm. Prints figures
 * beside the target; never fails on it.
 */
import { accuracyMap } from '../src/lib/engine/accuracy-map';
import type { ArmGeometry } from '../src/lib/engine/types';
import { renderCertificate, type CertificateInput } from '../src/lib/server/certificate-pdf';
import { MAP_OPTIONS } from '../src/lib/server/report-tasks';
import { SAFETY_CAUTION } from '../src/lib/shared/safety';

const nominal: ArmGeometry = {
  format: 'offsetry-arm/1',
  name: 'Bench arm B6',
  convention: 'dh',
  joints: [
    { name: 'J1', type: 'revolute', a: 150, alpha: -90, d: 450, theta: 0, min: -170, max: 170 },
    { name: 'J2', type: 'revolute', a: 610, alpha: 0, d: 0, theta: -90, min: -100, max: 140 },
    { name: 'J3', type: 'revolute', a: 110, alpha: -90, d: 0, theta: 0, min: -120, max: 160 },
    { name: 'J4', type: 'revolute', a: 0, alpha: 90, d: 660, theta: 0, min: -180, max: 180 },
    { name: 'J5', type: 'revolute', a: 0, alpha: -90, d: 0, theta: 0, min: -125, max: 125 },
    { name: 'J6', type: 'revolute', a: 0, alpha: 0, d: 95, theta: 0, min: -350, max: 350 },
  ],
  tool: { x: 12, y: -8, z: 140, rx: 0, ry: 0, rz: 0 },
};
const calibrated: ArmGeometry = { ...nominal, joints: nominal.joints.map((j, i) => ({ ...j, a: j.a + 0.1 * i, theta: j.theta + 0.01 * i })), base: { x: 1980, y: 12, z: 3, rx: 0, ry: 0, rz: 31 } };
const st = (rms: number) => ({ n: 60, rms, mean: rms * 0.9, max: rms * 2, p95: rms * 1.7 });
const input: CertificateInput = {
  certificateNo: 'OC-2026-000001',
  set: { id: '00000000-0000-4000-8000-000000000001', version: 1, approvedAt: '2026-03-05T14:00:00.000Z', comment: '' },
  unit: { serial: 'BENCH-1', site: 'Bench site', cell: '' },
  model: { name: nominal.name, manufacturer: 'Invented', revision: 1 },
  company: 'Offsetry',
  sessions: [{ measuredOn: '2026-03-02', technician: 'Bench', instrument: 'tracker', statedUncertainty: null, ambientC: 20, target: 'SMR', fileName: 'b.csv', fileSha256: '0'.repeat(64), poseCount: 80, repeatGroups: 0 }],
  method: { convention: 'dh', groups: ['lengths', 'twists', 'offsets', 'base', 'tool'], registration: { registered: false, rmsMm: null }, robust: 'none', holdout: 0.2, kFold: 0, engineVersion: 'bench', iterations: 5, stopReason: 'converged', fitPoses: 64, holdoutPoses: 16, excludedPoses: 0 },
  results: { fit: { before: st(0.8), after: st(0.02) }, holdout: { before: st(0.8), after: st(0.025) }, crossValidation: null, iso: null },
  residuals: Array.from({ length: 80 }, (_, i) => ({ label: `P${i}`, role: i % 5 ? 'fit' : 'holdout', before: 0.5 + (i % 9) * 0.1, after: 0.01 + (i % 5) * 0.005 })),
  parameters: [],
  approvals: { runBy: 'A', submittedBy: 'A', submittedAt: null, approvedBy: 'B', approvedAt: '2026-03-05T14:00:00.000Z', fourEyesRule: true, fourEyesMet: true },
  files: [],
  nominal,
  calibrated,
  mapOptions: { ...MAP_OPTIONS },
  safety: SAFETY_CAUTION,
};

const time = async (f: () => unknown, n = 3) => {
  const ms: number[] = [];
  for (let i = 0; i < n; i++) {
    const t = performance.now();
    await f();
    ms.push(performance.now() - t);
  }
  return Math.min(...ms);
};
const mapMs = await time(() => accuracyMap(nominal, calibrated, MAP_OPTIONS));
console.log(`accuracy map (${MAP_OPTIONS.samples} configurations, 3 planes): ${mapMs.toFixed(0)} ms (target < 500 ms)`);
const pdfMs = await time(() => renderCertificate(input));
console.log(`certificate PDF including the map: ${pdfMs.toFixed(0)} ms (target < 2000 ms; drawn in a worker thread)`);

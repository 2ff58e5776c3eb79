/**
 * One data row of a session file read against the header's columns and the model's joints: numbers
 * checked strictly (decimal point, no NaN or Infinity), readings outside the joint limits listed, the
 * split value checked.
 */
import type { ArmGeometry, InputProblem, SessionPose } from './types';
import { DECIMAL_COMMA_RE, type Header, type ProblemFn } from './session-header';

/** Strict decimal number: optional sign, digits with optional point, optional exponent. */
const NUMBER_RE = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/** A numeric cell, or NaN after reporting what is wrong with it. */
function cellNumber(cell: string, line: number, column: string, unit: string, problem: ProblemFn): number {
  const raw = cell.trim();
  if (NUMBER_RE.test(raw)) return Number(raw);
  let what: string;
  if (raw === '') what = 'empty cell';
  else if (/^[+-]?nan$/i.test(raw)) what = 'NaN is not a measured value';
  else if (/^[+-]?(inf|infinity)$/i.test(raw)) what = 'Infinity is not a measured value';
  else if (DECIMAL_COMMA_RE.test(raw)) what = `"${raw}" uses a decimal comma`;
  else what = `"${raw.length > 40 ? raw.slice(0, 40) + '…' : raw}" is not a number`;
  problem({ line, column, message: what, expected: `a decimal number in ${unit} (e.g. 12.5)` });
  return NaN;
}

/** The pose of one data row, or undefined after reporting every problem in it. */
export function readRow(
  rec: string[],
  line: number,
  h: Header,
  geometry: ArmGeometry,
  problem: ProblemFn,
  outsideLimits: InputProblem[],
  file: string,
): SessionPose | undefined {
  if (rec.length !== h.count) {
    const decimalComma = rec.length > h.count && rec.some((c, k) => k > 0 && /^\d+$/.test(c.trim()));
    const delim = rec.length === 1 && /[;\t]/.test(rec[0]);
    problem({
      line,
      message: `the row has ${rec.length} field${rec.length === 1 ? '' : 's'} but the header has ${h.count}${
        decimalComma ? ' — numbers written with a decimal comma ("1,5") split into two fields' : ''
      }${delim ? ' — the row is separated by ";" or tabs, not commas' : ''}`,
      expected: `${h.count} comma-separated fields${decimalComma ? ', decimal point (1.5)' : ''}`,
    });
    return undefined;
  }
  let bad = false;
  const label = rec[h.pose].trim();
  if (label === '') {
    problem({ line, column: 'pose', message: 'empty pose label', expected: 'a label such as P1' });
    bad = true;
  }
  const q = new Array<number>(h.q.length);
  for (let j = 0; j < h.q.length; j++) {
    const joint = geometry.joints[j];
    const unit = joint.type === 'prismatic' ? 'mm' : 'deg';
    const v = cellNumber(rec[h.q[j]], line, `q${j + 1}`, unit, problem);
    if (v !== v) bad = true; // NaN: reported
    q[j] = v;
    if (Number.isFinite(v) && ((joint.min !== undefined && v < joint.min) || (joint.max !== undefined && v > joint.max))) {
      outsideLimits.push({
        file,
        line,
        column: `q${j + 1}`,
        message: `joint ${joint.name} reading ${v} ${unit} is outside the model's limits`,
        expected: `${joint.min ?? '−∞'} to ${joint.max ?? '∞'} ${unit}`,
      });
    }
  }
  const x = cellNumber(rec[h.x], line, 'x', 'mm', problem);
  const y = cellNumber(rec[h.y], line, 'y', 'mm', problem);
  const z = cellNumber(rec[h.z], line, 'z', 'mm', problem);
  if (x !== x || y !== y || z !== z) bad = true;
  let split: SessionPose['split'];
  if (h.split >= 0) {
    const s = rec[h.split].trim().toLowerCase();
    if (s === 'fit' || s === 'validate') split = s;
    else if (s !== '') {
      problem({ line, column: 'split', message: `unknown split value "${rec[h.split].trim()}"`, expected: '"fit", "validate" or empty' });
      bad = true;
    }
  }
  if (bad) return undefined;
  const pose: SessionPose = { label, line, q, x, y, z };
  if (split) pose.split = split;
  return pose;
}

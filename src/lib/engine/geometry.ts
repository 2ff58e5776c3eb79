/**
 * The arm geometry file ("offsetry-arm/1"): zod schema shared by the CLI, the API and the web form,
 * a strict JSON reader that reports line and column, and a full-precision writer.
 *
 * Browser-safe: no Node-only imports.
 */
import { z } from 'zod';
import { EngineInputError, type ArmGeometry, type InputProblem } from './types';

export const GEOMETRY_FORMAT = 'offsetry-arm/1' as const;

const finite = (what: string) =>
  z.number({ error: (iss) => (iss.input === undefined ? `${what} is required` : `${what} must be a number`) }).finite();

const optionalFinite = (what: string) =>
  z.number({ error: `${what} must be a number` }).finite().optional();

const frameSchema = z.strictObject({
  x: finite('x (mm)'),
  y: finite('y (mm)'),
  z: finite('z (mm)'),
  rx: optionalFinite('rx (deg)').default(0),
  ry: optionalFinite('ry (deg)').default(0),
  rz: optionalFinite('rz (deg)').default(0),
});

export const jointSchema = z
  .strictObject({
    name: z.string({ error: 'name is required (text, e.g. "J1")' }).trim().min(1, 'name must not be empty'),
    type: z.enum(['revolute', 'prismatic'], { error: 'type must be "revolute" or "prismatic"' }),
    a: finite('a (mm)'),
    alpha: finite('alpha (deg)'),
    d: finite('d (mm)'),
    theta: finite('theta (deg)'),
    beta: optionalFinite('beta (deg)'),
    min: optionalFinite('min'),
    max: optionalFinite('max'),
  })
  .superRefine(
    (j, ctx) => {
      if (typeof j?.min === 'number' && typeof j.max === 'number' && !(j.min < j.max)) {
        ctx.addIssue({ code: 'custom', path: ['max'], message: `max (${j.max}) must be greater than min (${j.min})` });
      }
    },
    // run even when other fields of the row are wrong, so every problem is reported at once
    { when: () => true },
  );

export const armGeometrySchema = z
  .strictObject({
    format: z.literal(GEOMETRY_FORMAT, { error: `format must be "${GEOMETRY_FORMAT}"` }),
    name: z.string({ error: 'name is required (text)' }).trim().min(1, 'name must not be empty'),
    convention: z.enum(['dh', 'mdh'], { error: 'unknown convention: must be "dh" or "mdh"' }),
    joints: z.array(jointSchema, { error: 'joints must be a list of joint rows' }).min(1, 'joints must list at least one joint'),
    base: frameSchema.optional(),
    tool: frameSchema.optional(),
    /**
     * Descriptive block written by Offsetry's exports (serial, version, units, sign convention …). Accepted
     * as any JSON object and ignored: it never becomes part of the geometry.
     */
    metadata: z.record(z.string(), z.unknown(), { error: 'metadata must be a JSON object' }).optional(),
  })
  .superRefine(
    (g, ctx) => {
    // `when: () => true` runs this on any input, a missing object included.
    if (!Array.isArray(g?.joints)) return;
    const seen = new Map<string, number>();
    g.joints.forEach((j, i) => {
      if (typeof j !== 'object' || j === null || typeof j.name !== 'string') return;
      const first = seen.get(j.name);
      if (first !== undefined) {
        ctx.addIssue({
          code: 'custom',
          path: ['joints', i, 'name'],
          message: `joint name "${j.name}" is used twice (also joints[${first}])`,
        });
      } else seen.set(j.name, i);
    });
    },
    { when: () => true },
  );

/** JSON path of a zod issue in the file's notation: joints[2].alpha */
export function formatPath(path: readonly PropertyKey[]): string {
  let out = '';
  for (const p of path) {
    if (typeof p === 'number') out += `[${p}]`;
    else out += out ? `.${String(p)}` : String(p);
  }
  return out;
}

// ---------------------------------------------------------------------------------------------
// Strict JSON (RFC 8259) reader that remembers where every value sits, so schema problems can
// name the line. JSON.parse gives neither positions of values nor reliable syntax positions.

interface Located {
  value: unknown;
  /** path (formatted as above) → 1-based line of the value; keys map to the line of their key. */
  lines: Map<string, number>;
}

class JsonSyntaxError extends Error {
  constructor(
    message: string,
    readonly line: number,
    readonly col: number,
  ) {
    super(message);
  }
}

function readJson(text: string): Located {
  let i = 0;
  let line = 1;
  let lineStart = 0;
  const lines = new Map<string, number>();
  const fail = (msg: string, at = i): never => {
    // recompute line/col at `at` (at ≥ lineStart except when reporting an earlier token)
    let l = 1;
    let ls = 0;
    for (let k = 0; k < at && k < text.length; k++) if (text.charCodeAt(k) === 10) { l++; ls = k + 1; }
    throw new JsonSyntaxError(msg, l, at - ls + 1);
  };
  const describe = (k: number) =>
    k >= text.length ? 'end of file' : text[k] === '\n' ? 'end of line' : `'${text[k]}'`;
  const missingComma = () => (/["\[{0-9-]/.test(text[i] ?? '') ? ' (a comma is probably missing before it)' : '');
  const ws = () => {
    for (;;) {
      const c = text.charCodeAt(i);
      if (c === 10) { line++; i++; lineStart = i; }
      else if (c === 32 || c === 9 || c === 13) i++;
      else if (c === 47 && (text[i + 1] === '/' || text[i + 1] === '*')) fail('comments are not allowed in JSON');
      else break;
    }
  };
  const str = (): string => {
    const start = i;
    i++; // opening quote
    let out = '';
    let chunk = i;
    for (;;) {
      if (i >= text.length) fail('unterminated string', start);
      const c = text.charCodeAt(i);
      if (c === 34) { out += text.slice(chunk, i); i++; return out; }
      if (c < 32) fail('control character inside a string (write line breaks as \\n)');
      if (c === 92) {
        out += text.slice(chunk, i);
        const e = text[i + 1];
        const map: Record<string, string> = { '"': '"', '\\': '\\', '/': '/', b: '\b', f: '\f', n: '\n', r: '\r', t: '\t' };
        if (e === 'u') {
          const hex = text.slice(i + 2, i + 6);
          if (!/^[0-9a-fA-F]{4}$/.test(hex)) fail('invalid \\u escape in string');
          out += String.fromCharCode(parseInt(hex, 16));
          i += 6;
        } else if (e !== undefined && map[e] !== undefined) {
          out += map[e];
          i += 2;
        } else fail(`invalid escape "\\${e ?? ''}" in string`);
        chunk = i;
        continue;
      }
      i++;
    }
  };
  const num = (): number => {
    const m = /-?(?:0|[1-9]\d*)(?:\.\d+)?(?:[eE][+-]?\d+)?/y;
    m.lastIndex = i;
    const r = m.exec(text);
    if (!r) fail(`unexpected ${describe(i)}: expected a value`);
    const next = text[i + r![0].length];
    if (next !== undefined && /[0-9.eE+\-a-zA-Z]/.test(next)) {
      fail(`invalid number near ${describe(i + r![0].length)} (decimal point is ".", no leading zeros)`, i);
    }
    i += r![0].length;
    return Number(r![0]);
  };
  const value = (path: string): unknown => {
    ws();
    lines.set(path, line);
    const c = text[i];
    if (c === '{') {
      i++;
      const obj: Record<string, unknown> = {};
      ws();
      if (text[i] === '}') { i++; return obj; }
      for (;;) {
        ws();
        if (text[i] !== '"') fail(`unexpected ${describe(i)}: expected a quoted key${text[i] === '}' ? ' (no trailing comma in JSON)' : ''}`);
        const keyLine = line;
        const keyAt = i;
        const key = str();
        const sub = path ? `${path}.${key}` : key;
        if (Object.prototype.hasOwnProperty.call(obj, key)) fail(`key "${key}" appears twice in the same object`, keyAt);
        ws();
        if (text[i] !== ':') fail(`unexpected ${describe(i)}: expected ":" after key "${key}"`);
        i++;
        const v = value(sub);
        lines.set(sub, keyLine);
        Object.defineProperty(obj, key, { value: v, enumerable: true, writable: true, configurable: true });
        ws();
        if (text[i] === ',') { i++; continue; }
        if (text[i] === '}') { i++; return obj; }
        fail(`unexpected ${describe(i)}: expected "," or "}"${missingComma()}`);
      }
    }
    if (c === '[') {
      i++;
      const arr: unknown[] = [];
      ws();
      if (text[i] === ']') { i++; return arr; }
      for (;;) {
        ws();
        if (text[i] === ']') fail('unexpected "]": no trailing comma in JSON');
        arr.push(value(`${path}[${arr.length}]`));
        ws();
        if (text[i] === ',') { i++; continue; }
        if (text[i] === ']') { i++; return arr; }
        fail(`unexpected ${describe(i)}: expected "," or "]"${missingComma()}`);
      }
    }
    if (c === '"') return str();
    if (text.startsWith('true', i)) { i += 4; return true; }
    if (text.startsWith('false', i)) { i += 5; return false; }
    if (text.startsWith('null', i)) { i += 4; return null; }
    if (text.startsWith('NaN', i) || text.startsWith('Infinity', i) || text.startsWith('-Infinity', i)) fail('NaN and Infinity are not JSON numbers');
    if (c === "'") fail('strings must use double quotes');
    return num();
  };
  // A UTF-8 byte-order mark is tolerated (editors on Windows write it).
  if (text.charCodeAt(0) === 0xfeff) i = 1;
  ws();
  if (i >= text.length) fail('the file is empty: expected a JSON object');
  const v = value('');
  ws();
  if (i < text.length) fail(`unexpected ${describe(i)} after the end of the JSON value`);
  return { value: v, lines };
}

/** Line of a path, or of its nearest ancestor that exists in the file. */
function lineOf(lines: Map<string, number>, path: readonly PropertyKey[]): number | undefined {
  for (let n = path.length; n >= 0; n--) {
    const l = lines.get(formatPath(path.slice(0, n)));
    if (l !== undefined) return l;
  }
  return undefined;
}

function zodProblems(error: z.ZodError, fileName: string, lines?: Map<string, number>): InputProblem[] {
  const out: InputProblem[] = [];
  for (const iss of error.issues) {
    if (iss.code === 'unrecognized_keys') {
      for (const k of iss.keys) {
        const path = [...iss.path, k];
        out.push({ file: fileName, line: lines && lineOf(lines, path), column: formatPath(path), message: `unknown field "${k}"`, expected: expectedKeys(iss.path) });
      }
      continue;
    }
    const field = formatPath(iss.path);
    out.push({ file: fileName, line: lines && lineOf(lines, iss.path), column: field || undefined, message: iss.message });
  }
  return out;
}

function expectedKeys(path: readonly PropertyKey[]): string {
  if (path.length === 0) return 'format, name, convention, joints, base, tool, metadata';
  if (path[0] === 'joints') return 'name, type, a, alpha, d, theta, beta, min, max';
  return 'x, y, z, rx, ry, rz';
}

/** The geometry alone: an export's metadata block is read past, never kept. */
function withoutMetadata(g: z.infer<typeof armGeometrySchema>): ArmGeometry {
  const { metadata: _ignored, ...geometry } = g;
  return geometry as ArmGeometry;
}

/** Validate an already-parsed value (e.g. an API body) against the schema; throws EngineInputError. */
export function validateGeometry(value: unknown, fileName = 'geometry'): ArmGeometry {
  const r = armGeometrySchema.safeParse(value);
  if (!r.success) throw new EngineInputError(zodProblems(r.error, fileName));
  return withoutMetadata(r.data);
}

/**
 * Read an arm geometry file. Strict JSON; every problem found is thrown at once in an EngineInputError,
 * each with the line (physical, from 1) and the JSON path of the field.
 */
export function parseGeometry(text: string, fileName: string): ArmGeometry {
  let located: Located;
  try {
    located = readJson(text);
  } catch (e) {
    if (e instanceof JsonSyntaxError) {
      throw new EngineInputError([
        { file: fileName, line: e.line, message: `malformed JSON at column ${e.col}: ${e.message}` },
      ]);
    }
    throw e;
  }
  const r = armGeometrySchema.safeParse(located.value);
  if (!r.success) throw new EngineInputError(zodProblems(r.error, fileName, located.lines));
  return withoutMetadata(r.data);
}

function checkFinite(v: number, where: string): number {
  if (!Number.isFinite(v)) throw new EngineInputError([{ message: `cannot write ${where}: ${v} is not a finite number` }]);
  return v;
}

/**
 * Pretty JSON with a stable key order. Numbers go through JSON.stringify, whose output is the shortest
 * text that reads back to the identical double (ECMA-262 Number::toString), so nothing is rounded.
 */
export function serializeGeometry(g: ArmGeometry, metadata?: Record<string, unknown>): string {
  const frame = (f: NonNullable<ArmGeometry['base']>, w: string) => ({
    x: checkFinite(f.x, `${w}.x`),
    y: checkFinite(f.y, `${w}.y`),
    z: checkFinite(f.z, `${w}.z`),
    rx: checkFinite(f.rx ?? 0, `${w}.rx`),
    ry: checkFinite(f.ry ?? 0, `${w}.ry`),
    rz: checkFinite(f.rz ?? 0, `${w}.rz`),
  });
  const out: Record<string, unknown> = {
    format: GEOMETRY_FORMAT,
    ...(metadata ? { metadata } : {}),
    name: g.name,
    convention: g.convention,
    joints: g.joints.map((j, i) => {
      const w = `joints[${i}]`;
      const row: Record<string, unknown> = {
        name: j.name,
        type: j.type,
        a: checkFinite(j.a, `${w}.a`),
        alpha: checkFinite(j.alpha, `${w}.alpha`),
        d: checkFinite(j.d, `${w}.d`),
        theta: checkFinite(j.theta, `${w}.theta`),
      };
      if (j.beta !== undefined) row.beta = checkFinite(j.beta, `${w}.beta`);
      if (j.min !== undefined) row.min = checkFinite(j.min, `${w}.min`);
      if (j.max !== undefined) row.max = checkFinite(j.max, `${w}.max`);
      return row;
    }),
  };
  if (g.base) out.base = frame(g.base, 'base');
  if (g.tool) out.tool = frame(g.tool, 'tool');
  return JSON.stringify(out, null, 2) + '\n';
}

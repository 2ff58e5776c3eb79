import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { armGeometrySchema, parseGeometry, serializeGeometry, validateGeometry } from '../../src/lib/engine/geometry';
import { EngineInputError, type InputProblem } from '../../src/lib/engine/types';
import { ROOT, s4Nominal, r6Nominal, r6True } from './make-test-data';

function problemsOf(text: string, file = 'arm.json'): InputProblem[] {
  try {
    parseGeometry(text, file);
  } catch (e) {
    expect(e).toBeInstanceOf(EngineInputError);
    return (e as EngineInputError).problems;
  }
  throw new Error('expected parseGeometry to throw');
}

const minimal = {
  format: 'offsetry-arm/1',
  name: 'Two-link test arm',
  convention: 'dh',
  joints: [
    { name: 'J1', type: 'revolute', a: 300, alpha: 0, d: 0, theta: 0 },
    { name: 'J2', type: 'revolute', a: 250, alpha: 0, d: 0, theta: 0 },
  ],
};

describe('parseGeometry', () => {
  it('reads the committed sample files and matches the generator', () => {
    expect(parseGeometry(readFileSync(join(ROOT, 'orrin-r6-620-nominal.json'), 'utf8'), 'orrin-r6-620-nominal.json')).toEqual(r6Nominal());
    expect(parseGeometry(readFileSync(join(ROOT, 'orrin-s4-410-nominal.json'), 'utf8'), 'orrin-s4-410-nominal.json')).toEqual(s4Nominal());
    expect(parseGeometry(readFileSync(join(ROOT, 'orrin-r6-620-true.json'), 'utf8'), 'orrin-r6-620-true.json')).toEqual(r6True());
  });

  it('fills omitted base and tool rotations with 0 and keeps beta only where listed', () => {
    const g = parseGeometry(JSON.stringify({ ...minimal, tool: { x: 1, y: 2, z: 3 }, base: { x: 0, y: 0, z: 5, rz: 90 } }), 'a.json');
    expect(g.tool).toEqual({ x: 1, y: 2, z: 3, rx: 0, ry: 0, rz: 0 });
    expect(g.base).toEqual({ x: 0, y: 0, z: 5, rx: 0, ry: 0, rz: 90 });
    expect('beta' in g.joints[0]).toBe(false);
  });

  it('accepts a UTF-8 byte-order mark', () => {
    expect(parseGeometry('\ufeff' + JSON.stringify(minimal), 'a.json').joints).toHaveLength(2);
  });

  it('reports malformed JSON with line and column', () => {
    const text = '{\n  "format": "offsetry-arm/1",\n  "name": "X"\n  "convention": "dh"\n}';
    const [p] = problemsOf(text);
    expect(p.file).toBe('arm.json');
    expect(p.line).toBe(4);
    expect(p.message).toMatch(/malformed JSON at column 3: .*expected "," or "}"/);
  });

  it.each([
    ['trailing comma', '{"a": 1,\n}', 2, /no trailing comma/],
    ['comment', '{\n // note\n "a": 1}', 2, /comments are not allowed/],
    ['NaN', '{"a": NaN}', 1, /NaN and Infinity are not JSON numbers/],
    ['single quotes', "{'a': 1}", 1, /quoted key/],
    ['leading zero', '{"a": 012}', 1, /invalid number/],
    ['decimal comma', '{"a": [1,5\n,2,]}', 2, /trailing comma/],
    ['unterminated string', '{"a": "x}', 1, /unterminated string/],
    ['empty', '   ', 1, /empty/],
    ['two values', '{} {}', 1, /after the end of the JSON value/],
    ['duplicate key', '{"a": 1,\n"a": 2}', 2, /key "a" appears twice/],
  ])('rejects %s', (_name, text, line, re) => {
    const [p] = problemsOf(text);
    expect(p.line).toBe(line);
    expect(p.message).toMatch(re);
  });

  it('reports every schema problem with JSON path and line', () => {
    const text = [
      '{',
      '  "format": "offsetry-arm/1",',
      '  "name": "Broken arm",',
      '  "convention": "denavit",',
      '  "joints": [',
      '    { "name": "J1", "type": "revolute", "a": 0, "alpha": 0, "d": 300, "theta": 0 },',
      '    { "name": "J2", "a": 0, "alpha": "90", "d": 0, "theta": 0 },',
      '    { "name": "J1", "type": "revolute", "a": 0, "alpah": 0, "d": 0, "theta": 0, "min": 10, "max": 5 }',
      '  ],',
      '  "tool": { "x": 0, "y": 0 }',
      '}',
    ].join('\n');
    const problems = problemsOf(text);
    const by = (field: string) => problems.find((p) => p.column === field);
    expect(by('convention')).toMatchObject({ line: 4, message: expect.stringMatching(/unknown convention/) });
    expect(by('joints[1].type')).toMatchObject({ line: 7, message: expect.stringMatching(/revolute.*prismatic/) });
    expect(by('joints[1].alpha')).toMatchObject({ line: 7, message: expect.stringMatching(/must be a number/) });
    expect(by('joints[2].alpha')).toMatchObject({ line: 8, message: expect.stringMatching(/required/) });
    expect(by('joints[2].alpah')).toMatchObject({ line: 8, message: expect.stringMatching(/unknown field "alpah"/) });
    expect(by('tool.z')).toMatchObject({ line: 10, message: expect.stringMatching(/required/) });
    // the cross-field rules are reported together with the field problems, not after they are fixed
    expect(by('joints[2].name')).toMatchObject({ line: 8, message: expect.stringMatching(/"J1" is used twice/) });
    expect(by('joints[2].max')).toMatchObject({ line: 8, message: expect.stringMatching(/greater than min/) });
    expect(problems.every((p) => p.file === 'arm.json')).toBe(true);
  });

  it('refuses duplicate joint names and min ≥ max', () => {
    const dup = { ...minimal, joints: [minimal.joints[0], { ...minimal.joints[1], name: 'J1' }] };
    expect(problemsOf(JSON.stringify(dup, null, 2))).toEqual([
      expect.objectContaining({ column: 'joints[1].name', message: expect.stringMatching(/"J1" is used twice/) }),
    ]);
    const limits = { ...minimal, joints: [{ ...minimal.joints[0], min: 10, max: -10 }, minimal.joints[1]] };
    expect(problemsOf(JSON.stringify(limits, null, 2))[0]).toMatchObject({ column: 'joints[0].max', message: expect.stringMatching(/greater than min/) });
  });

  it('refuses a wrong format tag and an empty joint list', () => {
    const p = problemsOf(JSON.stringify({ ...minimal, format: 'arm/2', joints: [] }));
    expect(p.map((x) => x.column).sort()).toEqual(['format', 'joints']);
  });

  it('the committed bad geometry files each fail with a located problem', () => {
    const cases: [string, RegExp, string | undefined][] = [
      ['geometry-malformed.json', /malformed JSON/, undefined],
      ['geometry-unknown-convention.json', /unknown convention/, 'convention'],
      ['geometry-duplicate-joint.json', /used twice/, 'joints[4].name'],
      ['geometry-missing-type.json', /type must be/, 'joints[3].type'],
    ];
    for (const [file, re, column] of cases) {
      const [p] = problemsOf(readFileSync(join(ROOT, 'bad', file), 'utf8'), file);
      expect(p.message).toMatch(re);
      expect(p.column).toBe(column);
      expect(p.line).toBeGreaterThan(1);
    }
  });
});

describe('serializeGeometry', () => {
  it('round-trips every double exactly (no rounding)', () => {
    const g = r6True();
    g.joints[2].a = 469.66000000000003; // not representable in fewer digits
    g.joints[1].alpha = -Math.PI * 28.65;
    g.base!.rz = 1 / 3;
    g.tool!.x = 5e-324; // smallest subnormal
    const text = serializeGeometry(g);
    const back = parseGeometry(text, 'rt.json');
    expect(back).toEqual(g);
    expect(Object.is(back.joints[2].a, 469.66000000000003)).toBe(true);
    expect(back.base!.rz).toBe(1 / 3);
    expect(text).toContain('0.3333333333333333');
  });

  it('writes pretty JSON in the file-contract key order', () => {
    const text = serializeGeometry(parseGeometry(JSON.stringify({ ...minimal, tool: { z: 3, y: 2, x: 1 } }), 'a.json'));
    expect(text.split('\n')[1]).toBe('  "format": "offsetry-arm/1",');
    expect(Object.keys(JSON.parse(text))).toEqual(['format', 'name', 'convention', 'joints', 'tool']);
    expect(Object.keys(JSON.parse(text).tool)).toEqual(['x', 'y', 'z', 'rx', 'ry', 'rz']);
  });

  it('refuses to write non-finite numbers', () => {
    const g = r6Nominal();
    g.joints[0].d = NaN;
    expect(() => serializeGeometry(g)).toThrow(/joints\[0\]\.d/);
  });
});

describe('armGeometrySchema / validateGeometry', () => {
  it('is the same schema the API can use on a parsed body', () => {
    expect(armGeometrySchema.safeParse(minimal).success).toBe(true);
    expect(() => validateGeometry({ ...minimal, convention: 'x' }, 'body')).toThrow(/body, field convention: unknown convention/);
  });
});

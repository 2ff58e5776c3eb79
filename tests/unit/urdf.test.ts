/**
 * URDF export and the converter check: our reader (src/lib/server/urdf-reader.ts) against the URDF XML
 * specification's own examples, then the exported chain against the engine's forward kinematics.
 */
import { describe, expect, it } from 'vitest';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { EngineInputError, type ArmGeometry } from '../../src/lib/engine/types';
import { geometryToUrdf, planUrdfJoints, rpyOf, mul, rotX, rotY, rotZ } from '../../src/lib/server/urdf';
import { chainPointMm, chainTo, linkFrame, parseUrdf } from '../../src/lib/server/urdf-reader';
import { fourAxisParallel, randomQ, rng, sixAxisDh, sixAxisMdh } from '../engine/helpers';

// The converter check's tolerance: 1e-6 mm. Arms are about 1–2 m long, so double rounding through
// the mm → m → mm conversion and the rpy decomposition stays near 1e-12 mm; 1e-6 leaves ample room.
const TOL_MM = 1e-6;

describe('URDF reader against the URDF XML specification examples', () => {
  it('reads the specification\'s <joint> example (origin xyz="0 0 1" rpy="0 0 3.1416", limit −2.2…0.7)', () => {
    // The <joint> example of the URDF XML specification, wiki.ros.org/urdf/XML/joint (reproduced from
    // memory and checked against copies of that page; the commented-out axis is as published), wrapped in a
    // <robot> with the two links it names.
    const text = `<?xml version="1.0"?>
<robot name="spec_example">
  <link name="link1"/>
  <link name="link2"/>
  <joint name="my_joint" type="floating">
    <origin xyz="0 0 1" rpy="0 0 3.1416"/>
    <parent link="link1"/>
    <child link="link2"/>
    <!--<axis xyz="1 0 0" />-->
    <calibration rising="0.0"/>
    <dynamics damping="0.0" friction="0.0"/>
    <limit effort="30" velocity="1.0" lower="-2.2" upper="0.7" />
    <safety_controller k_velocity="10" k_position="15" soft_lower_limit="-2.0" soft_upper_limit="0.5" />
  </joint>
</robot>`;
    const robot = parseUrdf(text, 'spec-joint.urdf');
    expect(robot.root).toBe('link1');
    const j = robot.joints[0]!;
    expect(j).toMatchObject({ name: 'my_joint', type: 'floating', parent: 'link1', child: 'link2', xyz: [0, 0, 1], rpy: [0, 0, 3.1416] });
    // The specification: <axis> defaults to (1, 0, 0); limit values as written.
    expect(j.axis).toEqual([1, 0, 0]);
    expect(j.limit).toMatchObject({ lower: -2.2, upper: 0.7, effort: 30, velocity: 1 });
    // link2's frame: 1 m up, yawed by 3.1416 rad about z — its x axis points (cos 3.1416, sin 3.1416, 0).
    const T = linkFrame(robot, 'link2');
    expect(T[3]).toBe(0);
    expect(T[7]).toBe(0);
    expect(T[11]).toBe(1);
    expect(T[0]).toBeCloseTo(Math.cos(3.1416), 15);
    expect(T[4]).toBeCloseTo(Math.sin(3.1416), 15);
  });

  it('composes the tree of the URDF tutorial "Create your own urdf file" (continuous joints, unnormalised axes)', () => {
    // Recalled from memory: the four-link example of the URDF tutorials (wiki.ros.org/urdf/Tutorials).
    // Hand-solved at q = 0: link4 = Txy(-2, 5)·Rz(1.57)·Tx(5)·Rz(-1.57) ⇒ origin (-2 + 5 cos 1.57, 5 + 5 sin 1.57, 0).
    const text = `<robot name="test_robot">
  <link name="link1" />
  <link name="link2" />
  <link name="link3" />
  <link name="link4" />
  <joint name="joint1" type="continuous">
    <parent link="link1"/>
    <child link="link2"/>
    <origin xyz="5 3 0" rpy="0 0 0" />
    <axis xyz="-0.9 0.15 0" />
  </joint>
  <joint name="joint2" type="continuous">
    <parent link="link1"/>
    <child link="link3"/>
    <origin xyz="-2 5 0" rpy="0 0 1.57" />
    <axis xyz="-0.707 0.707 0" />
  </joint>
  <joint name="joint3" type="continuous">
    <parent link="link3"/>
    <child link="link4"/>
    <origin xyz="5 0 0" rpy="0 0 -1.57" />
    <axis xyz="0.707 -0.707 0" />
  </joint>
</robot>`;
    const robot = parseUrdf(text, 'tutorial.urdf');
    expect(chainTo(robot, 'link4').map((j) => j.name)).toEqual(['joint2', 'joint3']);
    const T = linkFrame(robot, 'link4');
    expect(T[3]).toBeCloseTo(-2 + 5 * Math.cos(1.57), 12);
    expect(T[7]).toBeCloseTo(5 + 5 * Math.sin(1.57), 12);
    // The axis is normalised (the specification calls it a unit vector).
    expect(Math.hypot(...robot.joints[0]!.axis)).toBeCloseTo(1, 15);
    // Turning joint2 by 90° about its axis (−1, 1, 0)/√2 in link3's parent frame rotated by 1.57 moves link4's
    // origin; the rotation keeps the distance from the joint origin (5 m): a property any correct chain has.
    const q = linkFrame(robot, 'link4', { joint2: Math.PI / 2 });
    expect(Math.hypot(q[3]! + 2, q[7]! - 5, q[11]!)).toBeCloseTo(5, 12);
    expect(q[11]).not.toBeCloseTo(0, 3);
  });

  it('names file, line and field for bad URDF', () => {
    const bad = `<robot name="x">
  <link name="a"/>
  <joint name="j" type="hinge">
    <parent link="a"/>
    <child link="b"/>
    <origin xyz="0 0" rpy="0 0 0"/>
  </joint>
</robot>`;
    try {
      parseUrdf(bad, 'bad.urdf');
      expect.unreachable();
    } catch (e) {
      expect(e).toBeInstanceOf(EngineInputError);
      const msgs = (e as EngineInputError).problems;
      expect(msgs).toContainEqual(expect.objectContaining({ file: 'bad.urdf', line: 3, column: 'joint.type' }));
      expect(msgs).toContainEqual(expect.objectContaining({ line: 6, column: 'origin.xyz' }));
      expect(msgs).toContainEqual(expect.objectContaining({ line: 3, message: expect.stringContaining('link "b"') }));
    }
    expect(() => parseUrdf('<robot><link name="a"></robot>', 'x.urdf')).toThrow(/x\.urdf, line 1: closing tag <\/robot> does not match <link>/);
  });

  it('reads entities and element lines through the XML layer, and names the line of malformed XML', () => {
    // A byte-order mark, a declaration, a comment and a DOCTYPE before the root do not shift the lines.
    const text = `\ufeff<?xml version="1.0"?>
<!-- made by hand -->
<!DOCTYPE robot>
<robot name="R &amp; D &#65;&#x42; &lt;1&gt; &quot;q&quot; &apos;s&apos; &amp;#60;">
  <link name="a"/>

  <link
    name="b"/>
  <joint name="j" type="fixed"><parent link="a"/><child link="b"/></joint>
</robot>`;
    const robot = parseUrdf(text, 'ok.urdf');
    // Predefined entities and numeric references decode once ("&amp;#60;" stays the text "&#60;").
    expect(robot.name).toBe('R & D AB <1> "q" \'s\' &#60;');
    expect(robot.joints[0]).toMatchObject({ line: 9, parent: 'a', child: 'b' });
    const fails = (xml: string) => {
      try {
        parseUrdf(xml, 'm.urdf');
      } catch (e) {
        expect(e).toBeInstanceOf(EngineInputError);
        return (e as EngineInputError).problems;
      }
      return expect.unreachable();
    };
    expect(fails('<robot name="x">\n  <link name="a" name="b"/>\n</robot>')).toEqual([expect.objectContaining({ file: 'm.urdf', line: 2, message: expect.stringContaining("'name' is repeated") })]);
    expect(fails('<robot name="x">\n  <link name="a">\n')).toEqual([expect.objectContaining({ message: expect.stringMatching(/<link> is never closed/) })]);
    expect(fails('<robot/>\n<robot/>')).toEqual([expect.objectContaining({ line: 2, message: 'more than one root element' })]);
    expect(fails('  \n')).toEqual([expect.objectContaining({ message: 'no root element: the file is empty' })]);
    expect(fails('<robot name="x">\n<link name=a/>\n</robot>')).toEqual([expect.objectContaining({ line: 2 })]);
  });
});

describe('rpy decomposition', () => {
  it('reproduces rotations, also at and near pitch ±90°', () => {
    const r = rng(11);
    const cases: [number, number, number][] = [[0.3, Math.PI / 2, -1.1], [0.3, -Math.PI / 2, 2], [1, Math.PI / 2 - 1e-11, 0.5], [0, 0, Math.PI]];
    for (let k = 0; k < 200; k++) cases.push([(r() - 0.5) * 2 * Math.PI, (r() - 0.5) * Math.PI, (r() - 0.5) * 2 * Math.PI]);
    for (const [a, b, c] of cases) {
      const R = mul(mul(rotZ(c), rotY(b)), rotX(a));
      const [roll, pitch, yaw] = rpyOf(R);
      const back = mul(mul(rotZ(yaw), rotY(pitch)), rotX(roll));
      for (let i = 0; i < 16; i++) expect(Math.abs(back[i]! - R[i]!)).toBeLessThan(1e-14);
    }
  });
});

/** Every parameter moved off its round value, beta on every joint, base and tool rotated. */
function calibratedLike(g: ArmGeometry, seed: number): ArmGeometry {
  const r = rng(seed);
  const s = (x: number, scale: number) => x + (r() - 0.5) * scale;
  return {
    ...g,
    joints: g.joints.map((j) => ({ ...j, a: s(j.a, 2), alpha: s(j.alpha, 0.2), d: s(j.d, 2), theta: s(j.theta, 0.2), beta: s(0, 0.2) })),
    base: { x: 1520.25, y: -312.5, z: 40.125, rx: 0.8, ry: -1.3, rz: 97.5 },
    tool: { x: s(g.tool?.x ?? 0, 1), y: s(g.tool?.y ?? 0, 1), z: s(g.tool?.z ?? 0, 1), rx: 12, ry: -30, rz: 45 },
  };
}

const variants: [string, ArmGeometry][] = [
  ['dh six-axis', sixAxisDh()],
  ['mdh six-axis', sixAxisMdh()],
  ['dh with a prismatic joint', fourAxisParallel()],
  ['mdh with a prismatic joint', { ...fourAxisParallel(), convention: 'mdh', name: 'Test arm Pell S4-600m' }],
];

describe('converter check: URDF chain = engine forward kinematics within 1e-6 mm', () => {
  for (const [label, nominal] of variants) {
    it(label, () => {
      const g = calibratedLike(nominal, 7);
      const text = geometryToUrdf(g, { comment: ['test -- export'], root: 'tracker' });
      const robot = parseUrdf(text, `${label}.urdf`);
      expect(robot.root).toBe('measurement');
      const movable = chainTo(robot, 'tool').filter((j) => j.type !== 'fixed');
      expect(movable.map((j) => j.type)).toEqual(g.joints.map((j) => (j.type === 'prismatic' ? 'prismatic' : 'revolute')));
      // Limits in radians / metres.
      g.joints.forEach((j, i) => {
        const scale = j.type === 'prismatic' ? 1 / 1000 : Math.PI / 180;
        expect(movable[i]!.limit!.lower).toBeCloseTo(j.min! * scale, 14);
        expect(movable[i]!.limit!.upper).toBeCloseTo(j.max! * scale, 14);
      });
      const r = rng(42);
      let worst = 0;
      for (let k = 0; k < 500; k++) {
        const q = randomQ(g, r);
        const engine = forwardPoint(g, q);
        const urdf = chainPointMm(robot, 'tool', q);
        worst = Math.max(worst, Math.hypot(engine[0] - urdf[0], engine[1] - urdf[1], engine[2] - urdf[2]));
      }
      console.log(`URDF round trip ${label}: worst ${worst.toExponential(2)} mm over 500 poses`);
      expect(worst).toBeLessThan(TOL_MM);
    });
  }

  it('fails when the geometry is not the one written (the check can fail)', () => {
    const g = calibratedLike(sixAxisDh(), 3);
    const robot = parseUrdf(geometryToUrdf(g, { root: 'tracker' }));
    const moved = { ...g, joints: g.joints.map((j, i) => (i === 2 ? { ...j, beta: j.beta! + 0.001 } : j)) };
    const q = [10, -20, 30, 40, -50, 60];
    const a = forwardPoint(moved, q), b = chainPointMm(robot, 'tool', q);
    expect(Math.hypot(a[0] - b[0], a[1] - b[1], a[2] - b[2])).toBeGreaterThan(1e-3);
  });

  it('writes one origin per joint plus base and tool, no extra joints', () => {
    const g = sixAxisMdh();
    expect(planUrdfJoints(g, 'tracker').map((j) => j.name)).toEqual(['base_frame', ...g.joints.map((j) => j.name), 'tool_point']);
    // Rooted at the robot base (the default): no measurement link, no base_frame joint.
    expect(planUrdfJoints(g).map((j) => j.name)).toEqual([...g.joints.map((j) => j.name), 'tool_point']);
    const text = geometryToUrdf({ ...g, joints: g.joints.map(({ min, max, ...j }) => j) });
    expect(parseUrdf(text).joints.filter((j) => j.type === 'continuous')).toHaveLength(6);
  });
});

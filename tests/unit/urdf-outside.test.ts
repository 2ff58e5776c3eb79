/**
 * The URDF writer checked by readers from outside the project:
 * - Python's standard XML parsers (xml.dom.minidom / xml.etree.ElementTree via python3): names and comments
 *   with "--", "--->" and a DOCTYPE with an external entity give well-formed XML with nothing injected;
 * - urdf-loader (npm, 0.13.1, on three.js 0.180.0; its own URDF parser and kinematic tree, DOM from linkedom)
 *   reproduces the engine's forward kinematics from the base-rooted URDF.
 */
import { execFileSync } from 'node:child_process';
import { DOMParser, Document, Element } from 'linkedom';
import * as THREE from 'three';
import { beforeAll, describe, expect, it } from 'vitest';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { commentSafe, geometryToUrdf } from '../../src/lib/server/urdf';
import { fourAxisParallel, randomQ, rng, sixAxisDh, sixAxisMdh } from '../engine/helpers';

const PYTHON = process.env.PYTHON || 'python3';

/** Parse with Python's minidom (expat): root name, robot name, comments, doctype, entity declarations. */
function pythonRead(xml: string): { root: string; name: string; comments: string[]; doctype: boolean; links: number } {
  const code = `
import sys, json
from xml.dom import minidom
doc = minidom.parseString(sys.stdin.buffer.read())
root = doc.documentElement
print(json.dumps({
  'root': root.tagName,
  'name': root.getAttribute('name'),
  'comments': [n.data for n in doc.childNodes if n.nodeType == n.COMMENT_NODE],
  'doctype': doc.doctype is not None,
  'links': len(root.getElementsByTagName('link')),
}))`;
  return JSON.parse(execFileSync(PYTHON, ['-c', code], { input: xml }).toString());
}

const HOSTILE = [
  'R6 -- 620',
  'R6 --->  <!DOCTYPE r [<!ENTITY x SYSTEM "file:///etc/passwd">]><robot name="evil">&x;</robot><!--',
  '<!DOCTYPE robot [<!ENTITY e SYSTEM "http://evil.example/e">]>',
  'ends with a hyphen -',
  'quote " and apostrophe \' and & and <tag>',
  'already escaped &amp; and &#60; stay literal',
];

describe('URDF text is well-formed XML whatever the names hold (Python minidom)', () => {
  for (const name of HOSTILE) {
    it(JSON.stringify(name), () => {
      const g = { ...sixAxisDh(), name };
      const xml = geometryToUrdf(g, { robotName: `${name} SN-1`, comment: [`arm model ${name} r1`, 'second line'] });
      const r = pythonRead(xml);
      expect(r.root).toBe('robot');
      expect(r.doctype).toBe(false);
      // The name survives exactly, as an attribute value.
      expect(r.name).toBe(`${name} SN-1`);
      // One comment, holding the (comment-safe) text; no markup escaped from it.
      expect(r.comments).toHaveLength(1);
      expect(r.comments[0]).toContain(commentSafe(`arm model ${name} r1`));
      expect(r.comments[0]).not.toContain('--');
      expect(r.links).toBe(8);
      // Outside the one comment (closed by the first "-->"), no declaration got in.
      expect(xml.replace(/<!--[\s\S]*?-->/, '')).not.toMatch(/<!DOCTYPE|<!ENTITY|<!--/);
    });
  }
});

/** urdf-loader needs a DOM: linkedom's DOMParser, Document and Element as globals. */
let URDFLoader: new () => { parse(xml: string): UrdfRobot3 };
interface UrdfRobot3 extends THREE.Object3D {
  joints: Record<string, { setJointValue(v: number): void; jointType: string }>;
  links: Record<string, THREE.Object3D>;
}
beforeAll(async () => {
  Object.assign(globalThis, { DOMParser, Document, Element });
  URDFLoader = (await import('urdf-loader')).default as unknown as typeof URDFLoader;
});

function calibratedLike(g: ArmGeometry, seed: number): ArmGeometry {
  const r = rng(seed);
  const s = (x: number, scale: number) => x + (r() - 0.5) * scale;
  return {
    ...g,
    joints: g.joints.map((j) => ({ ...j, a: s(j.a, 2), alpha: s(j.alpha, 0.2), d: s(j.d, 2), theta: s(j.theta, 0.2), beta: s(0, 0.2) })),
    base: { x: 1980.5, y: -312.5, z: 40.125, rx: 0.8, ry: -1.3, rz: 31 },
    tool: { x: s(g.tool?.x ?? 0, 1), y: s(g.tool?.y ?? 0, 1), z: s(g.tool?.z ?? 0, 1), rx: 12, ry: -30, rz: 45 },
  };
}

describe('urdf-loader reproduces the calibrated forward kinematics from the base-rooted URDF', () => {
  const variants: [string, ArmGeometry][] = [
    ['dh six-axis', sixAxisDh()],
    ['mdh six-axis', sixAxisMdh()],
    ['dh with a prismatic joint', fourAxisParallel()],
  ];
  for (const [label, nominal] of variants) {
    it(label, () => {
      const g = calibratedLike(nominal, 5);
      const robot = new URDFLoader().parse(geometryToUrdf(g));
      // Rooted at the robot base: the measurement (tracker) frame is not in the file.
      expect(robot.links.measurement).toBeUndefined();
      expect(robot.name === 'base' || robot.links.base === robot).toBe(true);
      const inBase: ArmGeometry = { ...g, base: undefined };
      const r = rng(9);
      let worst = 0;
      for (let k = 0; k < 100; k++) {
        const q = randomQ(g, r);
        g.joints.forEach((j, i) => robot.joints[j.name]!.setJointValue(j.type === 'prismatic' ? q[i]! / 1000 : (q[i]! * Math.PI) / 180));
        robot.updateMatrixWorld(true);
        const p = new THREE.Vector3().setFromMatrixPosition(robot.links.tool!.matrixWorld).multiplyScalar(1000);
        const e = forwardPoint(inBase, q);
        worst = Math.max(worst, Math.hypot(p.x - e[0], p.y - e[1], p.z - e[2]));
      }
      console.log(`urdf-loader ${label}: worst ${worst.toExponential(2)} mm over 100 poses`);
      expect(worst).toBeLessThan(1e-6);
    });
  }

  it('the tracker-rooted option places the base where the geometry says', () => {
    const g = calibratedLike(sixAxisDh(), 6);
    const robot = new URDFLoader().parse(geometryToUrdf(g, { root: 'tracker' }));
    expect(robot.links.measurement).toBeDefined();
    const q = [10, -20, 30, 40, -50, 60];
    g.joints.forEach((j, i) => robot.joints[j.name]!.setJointValue((q[i]! * Math.PI) / 180));
    robot.updateMatrixWorld(true);
    const p = new THREE.Vector3().setFromMatrixPosition(robot.links.tool!.matrixWorld).multiplyScalar(1000);
    const e = forwardPoint(g, q);
    expect(Math.hypot(p.x - e[0], p.y - e[1], p.z - e[2])).toBeLessThan(1e-6);
  });
});

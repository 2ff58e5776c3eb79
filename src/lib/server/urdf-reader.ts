/**
 * Our own URDF reader, independent of the writer (src/lib/server/urdf.ts shares no code with it): the XML
 * through fast-xml-parser, then the kinematic tree of links and joints as the URDF XML specification defines
 * it (wiki.ros.org/urdf/XML/joint):
 *   - <origin xyz rpy>: child-of-joint frame relative to the parent link; xyz in metres (default 0 0 0),
 *     rpy = fixed-axis roll, pitch, yaw in radians, R = Rz(yaw)·Ry(pitch)·Rx(roll) (default 0 0 0);
 *   - <axis xyz>: joint axis in the joint frame, default (1, 0, 0), normalised;
 *   - revolute / continuous: rotation by q about the axis; prismatic: translation by q along it (metres);
 *     fixed: no motion; floating / planar: carried at their zero configuration (not used by Offsetry);
 *   - <limit lower upper> in radians or metres.
 * Link frame = parent link frame · Origin · Motion(q).
 *
 * Used by the converter check: the exported URDF's chain must reproduce the engine's forward kinematics.
 * Pure code; bad input throws EngineInputError naming file, line and element/attribute.
 */
import { XMLParser, XMLValidator, type ValidationError } from 'fast-xml-parser';
import { EngineInputError, type InputProblem } from '../engine/types';

// ---------------------------------------------------------------------------------------------
// XML: fast-xml-parser checks well-formedness (its validator reports the line of the first fault) and reads
// the elements in document order with their attributes and start offsets. Text, comments, CDATA, the
// declaration and processing instructions are not part of the URDF model and are dropped.

export interface XmlElement {
  name: string;
  attrs: Record<string, string>;
  children: XmlElement[];
  line: number;
}

const parser = new XMLParser({
  preserveOrder: true,
  ignoreAttributes: false,
  attributeNamePrefix: '',
  parseAttributeValue: false,
  parseTagValue: false,
  ignoreDeclaration: true,
  ignorePiTags: true,
  captureMetaData: true,
  // Numeric character references (and HTML's named entities, harmless in names) besides XML's five.
  htmlEntities: true,
});
// Typed as the Symbol wrapper object by the library; the value is a symbol.
const META = XMLParser.getMetaDataSymbol() as unknown as symbol;

/** One node of the parser's ordered output: { [tag]: children, ':@'?: attributes } (text nodes: { '#text': … }). */
type OrderedNode = Record<string, unknown> & { ':@'?: Record<string, string>; [META]?: { startIndex: number } };

/** The validator's message in the reader's words where we know it; its own message otherwise. */
function xmlProblem(err: ValidationError['err'], text: string, fileName: string): InputProblem {
  const mismatch = /^Expected closing tag '([^']+)' \(opened in line (\d+)[^)]*\) instead of closing tag '([^']+)'/.exec(err.msg);
  if (mismatch) return { file: fileName, line: err.line, message: `closing tag </${mismatch[3]}> does not match <${mismatch[1]}> opened on line ${mismatch[2]}` };
  const unclosed = /^Invalid '(\[.*\])' found/s.exec(err.msg);
  if (unclosed) {
    const open = JSON.parse(unclosed[1]!) as string[];
    return { file: fileName, line: text.split('\n').length, message: `element <${open.at(-1)}> is never closed (the file ends inside ${open.map((n) => `<${n}>`).join(' ')})` };
  }
  if (!text.replace(/^\ufeff/, '').trim()) return { file: fileName, line: 1, message: 'no root element: the file is empty' };
  return { file: fileName, line: err.line, message: err.msg.replace(/\.$/, '') };
}

export function parseXml(text: string, fileName: string): XmlElement {
  const valid = XMLValidator.validate(text);
  if (valid !== true) throw new EngineInputError([xmlProblem(valid.err, text, fileName)]);
  const lineStarts = [0];
  for (let p = text.indexOf('\n'); p >= 0; p = text.indexOf('\n', p + 1)) lineStarts.push(p + 1);
  const lineAt = (offset: number) => {
    let lo = 0, hi = lineStarts.length - 1;
    while (lo < hi) {
      const mid = (lo + hi + 1) >> 1;
      if (lineStarts[mid]! <= offset) lo = mid;
      else hi = mid - 1;
    }
    return lo + 1;
  };
  const toElements = (nodes: OrderedNode[]): XmlElement[] =>
    nodes.flatMap((node) => {
      const name = Object.keys(node).find((k) => k !== ':@');
      if (!name || name.startsWith('#')) return [];
      return [{ name, attrs: { ...node[':@'] }, children: toElements(node[name] as OrderedNode[]), line: lineAt(node[META]?.startIndex ?? 0) }];
    });
  const roots = toElements(parser.parse(text) as OrderedNode[]);
  if (roots.length > 1) throw new EngineInputError([{ file: fileName, line: roots[1]!.line, message: 'more than one root element' }]);
  if (!roots[0]) throw new EngineInputError([{ file: fileName, line: 1, message: 'no root element: the file is empty' }]);
  return roots[0];
}

// ---------------------------------------------------------------------------------------------
// URDF model

export type UrdfJointType = 'revolute' | 'continuous' | 'prismatic' | 'fixed' | 'floating' | 'planar';
const JOINT_TYPES: readonly UrdfJointType[] = ['revolute', 'continuous', 'prismatic', 'fixed', 'floating', 'planar'];

export interface UrdfJoint {
  name: string;
  type: UrdfJointType;
  parent: string;
  child: string;
  /** metres */
  xyz: [number, number, number];
  /** radians: roll, pitch, yaw */
  rpy: [number, number, number];
  /** unit vector in the joint frame */
  axis: [number, number, number];
  limit?: { lower: number; upper: number; effort?: number; velocity?: number };
  line: number;
}

export interface UrdfRobot {
  name: string;
  links: string[];
  joints: UrdfJoint[];
  /** The one link that is no joint's child. */
  root: string;
}

export function parseUrdf(text: string, fileName = 'robot.urdf'): UrdfRobot {
  const doc = parseXml(text, fileName);
  const problems: InputProblem[] = [];
  const bad = (line: number, column: string, message: string, expected?: string) => problems.push({ file: fileName, line, column, message, expected });
  if (doc.name !== 'robot') throw new EngineInputError([{ file: fileName, line: doc.line, message: `root element is <${doc.name}>`, expected: '<robot>' }]);
  const numbers = (el: XmlElement, attr: string, count: number, fallback: number[]): number[] => {
    const raw = el.attrs[attr];
    if (raw === undefined) return fallback;
    const parts = raw.trim().split(/\s+/);
    const values = parts.map(Number);
    if (parts.length !== count || values.some((v) => !Number.isFinite(v))) {
      bad(el.line, `${el.name}.${attr}`, `"${raw}" is not ${count} numbers`, `${count} numbers separated by spaces`);
      return fallback;
    }
    return values;
  };
  const links: string[] = [];
  for (const el of doc.children.filter((c) => c.name === 'link')) {
    const name = el.attrs.name;
    if (!name) bad(el.line, 'link.name', 'link without a name');
    else if (links.includes(name)) bad(el.line, 'link.name', `link "${name}" is defined twice`);
    else links.push(name);
  }
  const joints: UrdfJoint[] = [];
  for (const el of doc.children.filter((c) => c.name === 'joint')) {
    const name = el.attrs.name ?? '';
    const type = el.attrs.type as UrdfJointType;
    if (!name) bad(el.line, 'joint.name', 'joint without a name');
    if (!JOINT_TYPES.includes(type)) bad(el.line, 'joint.type', `joint "${name}" has type "${el.attrs.type ?? ''}"`, JOINT_TYPES.join(', '));
    const child = (tag: string) => el.children.find((c) => c.name === tag);
    const parentLink = child('parent')?.attrs.link;
    const childLink = child('child')?.attrs.link;
    if (!parentLink) bad(el.line, 'joint.parent', `joint "${name}" has no <parent link="…">`);
    if (!childLink) bad(el.line, 'joint.child', `joint "${name}" has no <child link="…">`);
    const origin = child('origin');
    const xyz = origin ? numbers(origin, 'xyz', 3, [0, 0, 0]) : [0, 0, 0];
    const rpy = origin ? numbers(origin, 'rpy', 3, [0, 0, 0]) : [0, 0, 0];
    const axisEl = child('axis');
    let axis = axisEl ? numbers(axisEl, 'xyz', 3, [1, 0, 0]) : [1, 0, 0];
    const len = Math.hypot(axis[0]!, axis[1]!, axis[2]!);
    if (len === 0) {
      bad(axisEl!.line, 'axis.xyz', `joint "${name}" has a zero axis`);
      axis = [1, 0, 0];
    } else axis = axis.map((a) => a / len);
    const limitEl = child('limit');
    let limit: UrdfJoint['limit'];
    if (limitEl) {
      const get = (k: string) => (limitEl.attrs[k] === undefined ? undefined : Number(limitEl.attrs[k]));
      const lower = get('lower') ?? 0, upper = get('upper') ?? 0;
      if (!Number.isFinite(lower) || !Number.isFinite(upper)) bad(limitEl.line, 'limit', `joint "${name}" has a non-numeric limit`);
      limit = { lower, upper, effort: get('effort'), velocity: get('velocity') };
    } else if (type === 'revolute' || type === 'prismatic') {
      bad(el.line, 'joint.limit', `joint "${name}" of type ${type} has no <limit>`, 'required for revolute and prismatic joints');
    }
    joints.push({
      name, type, parent: parentLink ?? '', child: childLink ?? '',
      xyz: xyz as [number, number, number], rpy: rpy as [number, number, number], axis: axis as [number, number, number], limit, line: el.line,
    });
  }
  const childOf = new Map<string, UrdfJoint>();
  for (const j of joints) {
    for (const l of [j.parent, j.child]) if (l && !links.includes(l)) bad(j.line, 'joint', `joint "${j.name}" names link "${l}", which is not defined`);
    if (childOf.has(j.child)) bad(j.line, 'joint.child', `link "${j.child}" is the child of two joints ("${childOf.get(j.child)!.name}" and "${j.name}")`);
    childOf.set(j.child, j);
  }
  const roots = links.filter((l) => !childOf.has(l));
  if (roots.length !== 1) bad(doc.line, 'robot', `the links form ${roots.length} trees (roots: ${roots.join(', ') || 'none'})`, 'exactly one root link');
  if (problems.length) throw new EngineInputError(problems);
  return { name: doc.attrs.name ?? '', links, joints, root: roots[0]! };
}

// ---------------------------------------------------------------------------------------------
// Kinematics of the tree (row-major 4×4, metres).

type M = number[];
const mul = (a: M, b: M): M => {
  const o: number[] = new Array(16);
  for (let r = 0; r < 4; r++) for (let c = 0; c < 4; c++) o[4 * r + c] = a[4 * r]! * b[c]! + a[4 * r + 1]! * b[4 + c]! + a[4 * r + 2]! * b[8 + c]! + a[4 * r + 3]! * b[12 + c]!;
  return o;
};

/** Rotation by angle t about unit axis u (Rodrigues' formula). */
function axisAngle(u: readonly number[], t: number): M {
  const [x, y, z] = u as [number, number, number];
  const c = Math.cos(t), s = Math.sin(t), k = 1 - c;
  return [
    c + x * x * k, x * y * k - z * s, x * z * k + y * s, 0,
    y * x * k + z * s, c + y * y * k, y * z * k - x * s, 0,
    z * x * k - y * s, z * y * k + x * s, c + z * z * k, 0,
    0, 0, 0, 1,
  ];
}

/** URDF origin: translation, then R = Rz(yaw)·Ry(pitch)·Rx(roll). */
export function originMatrix(xyz: readonly number[], rpy: readonly number[]): M {
  const [r, p, y] = rpy as [number, number, number];
  const cr = Math.cos(r), sr = Math.sin(r), cp = Math.cos(p), sp = Math.sin(p), cy = Math.cos(y), sy = Math.sin(y);
  return [
    cy * cp, cy * sp * sr - sy * cr, cy * sp * cr + sy * sr, xyz[0]!,
    sy * cp, sy * sp * sr + cy * cr, sy * sp * cr - cy * sr, xyz[1]!,
    -sp, cp * sr, cp * cr, xyz[2]!,
    0, 0, 0, 1,
  ];
}

function jointMotion(j: UrdfJoint, q: number): M {
  if (j.type === 'revolute' || j.type === 'continuous') return axisAngle(j.axis, q);
  if (j.type === 'prismatic') return [1, 0, 0, j.axis[0] * q, 0, 1, 0, j.axis[1] * q, 0, 0, 1, j.axis[2] * q, 0, 0, 0, 1];
  return [1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1];
}

/** The joints from the root to `link`, in order. */
export function chainTo(robot: UrdfRobot, link: string): UrdfJoint[] {
  if (!robot.links.includes(link)) throw new Error(`URDF has no link "${link}"`);
  const byChild = new Map(robot.joints.map((j) => [j.child, j]));
  const chain: UrdfJoint[] = [];
  for (let l = link; l !== robot.root; ) {
    const j = byChild.get(l);
    if (!j) throw new Error(`link "${l}" is not connected to the root "${robot.root}"`);
    chain.unshift(j);
    l = j.parent;
    if (chain.length > robot.joints.length) throw new Error('the joints form a loop');
  }
  return chain;
}

/** Frame of `link` in the root link's frame; q maps joint name → value (rad or m); missing ⇒ 0. */
export function linkFrame(robot: UrdfRobot, link: string, q: Record<string, number> = {}): M {
  let T: M = [1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1];
  for (const j of chainTo(robot, link)) T = mul(mul(T, originMatrix(j.xyz, j.rpy)), jointMotion(j, q[j.name] ?? 0));
  return T;
}

/**
 * The origin of `tip` in the root frame, in mm, for joint readings in the geometry file's units (deg for
 * revolute/continuous, mm for prismatic), given in the order of the movable joints on the chain.
 */
export function chainPointMm(robot: UrdfRobot, tip: string, readings: readonly number[]): [number, number, number] {
  const movable = chainTo(robot, tip).filter((j) => j.type === 'revolute' || j.type === 'continuous' || j.type === 'prismatic');
  if (readings.length !== movable.length) throw new Error(`chain to "${tip}" has ${movable.length} movable joints, got ${readings.length} readings`);
  const q: Record<string, number> = {};
  movable.forEach((j, i) => (q[j.name] = j.type === 'prismatic' ? readings[i]! / 1000 : (readings[i]! * Math.PI) / 180));
  const T = linkFrame(robot, tip, q);
  return [T[3]! * 1000, T[7]! * 1000, T[11]! * 1000];
}

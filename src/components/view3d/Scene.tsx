/**
 * The three.js part of the 3-D view, loaded lazily by ArmView3D (nothing here reaches a page that does not
 * show the view). The scene is built imperatively from plain data and handed to @react-three/fiber as
 * primitives; it renders on demand (after a change or a camera move), which keeps software WebGL cheap.
 *
 * Coordinates: the measurement (tracker) frame in mm, z up, exactly as the engine computes them.
 */
import { Canvas, useThree } from '@react-three/fiber';
import { useEffect, useMemo } from 'react';
import * as THREE from 'three';
import { OrbitControls } from 'three/examples/jsm/controls/OrbitControls.js';
import { mergeGeometries } from 'three/examples/jsm/utils/BufferGeometryUtils.js';
import { forwardFrames } from '../../lib/engine/kinematics';
import type { ArmGeometry } from '../../lib/engine/types';
import { niceLength } from './decimate';
import { ROLE_TEXT, type View3DPose, type View3DRole } from './types';

export interface SceneInfo {
  /** Per role as drawn: geometry kind, vertex count of one marker, instances. Read from the scene graph. */
  shapes: Record<string, { geometry: string; vertices: number; count: number }>;
  /** Label of the pose the highlight marker sits on, and that the arm is drawn at. */
  highlight: string | null;
  armDrawnAt: string | null;
}

export interface SceneProps {
  poses: View3DPose[];
  geometry: ArmGeometry | null;
  selected: number;
  magnification: number;
  showArm: boolean;
  showVectors: boolean;
  resetSignal: number;
  onPick: (index: number) => void;
  onInfo: (info: SceneInfo) => void;
  onContextLost: () => void;
}

const INK = '#1c2330';
const ARM = '#5b6b82';
const HIGHLIGHT = '#b42318';

type Frames = number[][];
const origin = (f: number[]) => new THREE.Vector3(f[3], f[7], f[11]);
const zAxis = (f: number[]) => new THREE.Vector3(f[2], f[6], f[10]).normalize();

function armFrames(geometry: ArmGeometry | null, q: number[] | null | undefined): Frames | null {
  if (!geometry || !q || q.length !== geometry.joints.length) return null;
  try {
    return forwardFrames(geometry, q);
  } catch {
    return null;
  }
}

/** Marker geometry per role: the shape, not only the colour, tells the roles apart. */
function markerGeometry(role: View3DRole, r: number): THREE.BufferGeometry {
  switch (ROLE_TEXT[role].shape) {
    case 'cube':
      return new THREE.BoxGeometry(1.6 * r, 1.6 * r, 1.6 * r);
    case 'pyramid':
      return new THREE.ConeGeometry(1.2 * r, 2.2 * r, 4);
    case 'octahedron':
      return new THREE.OctahedronGeometry(1.3 * r);
    case 'cross': {
      // Three crossed bars (a 3-D ✕), readable from every side.
      const t = 0.45 * r, l = 2.6 * r;
      const bars = [new THREE.BoxGeometry(l, t, t), new THREE.BoxGeometry(t, l, t), new THREE.BoxGeometry(t, t, l)];
      bars[0]!.rotateZ(Math.PI / 4);
      bars[1]!.rotateZ(Math.PI / 4);
      const g = mergeGeometries(bars)!;
      g.name = 'cross';
      return g;
    }
    default:
      return new THREE.SphereGeometry(r, 12, 8);
  }
}

function label(text: string, heightMm: number, colour = INK): THREE.Sprite {
  const canvas = document.createElement('canvas');
  const ctx = canvas.getContext('2d')!;
  const px = 48;
  ctx.font = `600 ${px}px sans-serif`;
  canvas.width = Math.ceil(ctx.measureText(text).width) + 16;
  canvas.height = px + 16;
  ctx.font = `600 ${px}px sans-serif`;
  ctx.fillStyle = 'rgba(255,255,255,0.85)';
  ctx.fillRect(0, 0, canvas.width, canvas.height);
  ctx.fillStyle = colour;
  ctx.textBaseline = 'middle';
  ctx.fillText(text, 8, canvas.height / 2);
  const tex = new THREE.CanvasTexture(canvas);
  tex.colorSpace = THREE.SRGBColorSpace;
  const sprite = new THREE.Sprite(new THREE.SpriteMaterial({ map: tex, depthTest: false }));
  sprite.scale.set((heightMm * canvas.width) / canvas.height, heightMm, 1);
  sprite.renderOrder = 10;
  return sprite;
}

function cylinderBetween(a: THREE.Vector3, b: THREE.Vector3, radius: number, material: THREE.Material): THREE.Mesh | null {
  const d = new THREE.Vector3().subVectors(b, a);
  const len = d.length();
  if (len < 1e-6) return null;
  const mesh = new THREE.Mesh(new THREE.CylinderGeometry(radius, radius, len, 14), material);
  mesh.position.copy(a).addScaledVector(d, 0.5);
  mesh.quaternion.setFromUnitVectors(new THREE.Vector3(0, 1, 0), d.normalize());
  return mesh;
}

/** Links between successive frame origins, joint axes as short thick cylinders, the tool point as a ball. */
function buildArm(geometry: ArmGeometry, frames: Frames, size: number): THREE.Group {
  const g = new THREE.Group();
  g.name = 'arm';
  const n = geometry.joints.length;
  const origins = frames.map(origin);
  let reach = 0;
  for (const o of origins) reach = Math.max(reach, o.distanceTo(origins[0]!));
  const s = Math.max(reach, size * 0.3);
  const linkMat = new THREE.MeshLambertMaterial({ color: ARM });
  const axisMat = new THREE.MeshLambertMaterial({ color: INK });
  for (let k = 0; k + 1 < origins.length; k++) {
    const link = cylinderBetween(origins[k]!, origins[k + 1]!, s * 0.012, linkMat);
    if (link) g.add(link);
  }
  // Joint i turns about z of frame i−1 (DH) or z of frame i (modified DH); frames[0] is the base.
  for (let i = 1; i <= n; i++) {
    const f = frames[geometry.convention === 'dh' ? i - 1 : i]!;
    const at = origin(f), z = zAxis(f);
    const half = s * 0.05;
    const body = cylinderBetween(at.clone().addScaledVector(z, -half), at.clone().addScaledVector(z, half), s * (geometry.joints[i - 1]!.type === 'prismatic' ? 0.02 : 0.028), axisMat);
    if (body) {
      body.userData.joint = i;
      g.add(body);
    }
    const line = new THREE.Line(
      new THREE.BufferGeometry().setFromPoints([at.clone().addScaledVector(z, -half * 2.4), at.clone().addScaledVector(z, half * 2.4)]),
      new THREE.LineDashedMaterial({ color: INK, dashSize: s * 0.01, gapSize: s * 0.008 }),
    );
    line.computeLineDistances();
    g.add(line);
  }
  const base = cylinderBetween(origins[0]!.clone().addScaledVector(zAxis(frames[0]!), -s * 0.01), origins[0]!, s * 0.09, linkMat);
  if (base) g.add(base);
  const tool = new THREE.Mesh(new THREE.SphereGeometry(s * 0.018, 14, 10), axisMat);
  tool.position.copy(origins[origins.length - 1]!);
  g.add(tool);
  return g;
}

function bounds(poses: View3DPose[], extra: THREE.Vector3[]): { center: THREE.Vector3; radius: number; min: THREE.Vector3 } {
  const box = new THREE.Box3();
  for (const p of poses) box.expandByPoint(new THREE.Vector3(p.p[0], p.p[1], p.p[2]));
  for (const v of extra) box.expandByPoint(v);
  if (box.isEmpty()) box.expandByPoint(new THREE.Vector3());
  const center = box.getCenter(new THREE.Vector3());
  const radius = Math.max(box.getSize(new THREE.Vector3()).length() / 2, 10);
  return { center, radius, min: box.min.clone() };
}

function Controls({ center, radius, resetSignal }: { center: THREE.Vector3; radius: number; resetSignal: number }) {
  const { camera, gl, invalidate } = useThree();
  const controls = useMemo(() => {
    camera.up.set(0, 0, 1);
    const dir = new THREE.Vector3(1.4, -2.0, 1.1).normalize();
    camera.position.copy(center).addScaledVector(dir, radius * 2.1);
    (camera as THREE.PerspectiveCamera).near = radius / 100;
    (camera as THREE.PerspectiveCamera).far = radius * 50;
    (camera as THREE.PerspectiveCamera).updateProjectionMatrix();
    const c = new OrbitControls(camera, gl.domElement);
    c.target.copy(center);
    c.enableDamping = false;
    c.update();
    c.saveState();
    return c;
  }, [camera, gl, center, radius]);
  useEffect(() => {
    const onChange = () => invalidate();
    controls.addEventListener('change', onChange);
    return () => {
      controls.removeEventListener('change', onChange);
      controls.dispose();
    };
  }, [controls, invalidate]);
  useEffect(() => {
    if (resetSignal > 0) {
      controls.reset();
      invalidate();
    }
  }, [resetSignal, controls, invalidate]);
  return null;
}

function Content(props: SceneProps) {
  const { poses, geometry, selected, magnification, showArm, showVectors, onPick, onInfo } = props;
  const { invalidate, scene } = useThree();
  const firstWithQ = useMemo(() => poses.findIndex((p) => p.q && p.q.length), [poses]);
  // Bounds from the points and the arm at its first pose, fixed for the life of the view (the camera aims at it).
  const frame0 = useMemo(() => armFrames(geometry, poses[firstWithQ]?.q), [geometry, poses, firstWithQ]);
  const box = useMemo(() => bounds(poses, frame0 ? frame0.map(origin) : []), [poses, frame0]);
  const r = box.radius * 0.016;

  const markers = useMemo(() => {
    const byRole = new Map<View3DRole, number[]>();
    poses.forEach((p, i) => byRole.set(p.role, [...(byRole.get(p.role) ?? []), i]));
    const meshes: { role: View3DRole; mesh: THREE.InstancedMesh; indices: number[] }[] = [];
    const m = new THREE.Matrix4();
    for (const [role, indices] of byRole) {
      const mesh = new THREE.InstancedMesh(markerGeometry(role, r), new THREE.MeshLambertMaterial({ color: ROLE_TEXT[role].colour }), indices.length);
      mesh.name = `markers-${role}`;
      mesh.userData.role = role;
      indices.forEach((pi, k) => {
        const p = poses[pi]!.p;
        mesh.setMatrixAt(k, m.makeTranslation(p[0], p[1], p[2]));
      });
      mesh.instanceMatrix.needsUpdate = true;
      mesh.computeBoundingSphere();
      meshes.push({ role, mesh, indices });
    }
    return meshes;
  }, [poses, r]);

  const vectors = useMemo(() => {
    const pos: number[] = [], col: number[] = [];
    const c = new THREE.Color();
    for (const p of poses) {
      if (!p.e) continue;
      c.set(ROLE_TEXT[p.role].colour);
      pos.push(p.p[0], p.p[1], p.p[2], p.p[0] + magnification * p.e[0], p.p[1] + magnification * p.e[1], p.p[2] + magnification * p.e[2]);
      col.push(c.r, c.g, c.b, c.r, c.g, c.b);
    }
    const g = new THREE.BufferGeometry();
    g.setAttribute('position', new THREE.Float32BufferAttribute(pos, 3));
    g.setAttribute('color', new THREE.Float32BufferAttribute(col, 3));
    const lines = new THREE.LineSegments(g, new THREE.LineBasicMaterial({ vertexColors: true }));
    lines.name = 'error-vectors';
    return lines;
  }, [poses, magnification]);

  const armAt = poses[selected]?.q ? selected : firstWithQ;
  const arm = useMemo(() => {
    const frames = armFrames(geometry, poses[armAt]?.q);
    return frames && geometry ? buildArm(geometry, frames, box.radius) : null;
  }, [geometry, poses, armAt, box.radius]);

  const furniture = useMemo(() => {
    const g = new THREE.Group();
    const gridSize = niceLength(box.radius * 2.4);
    const grid = new THREE.GridHelper(gridSize, 10, '#b8c0cc', '#dde1e8');
    grid.rotation.x = Math.PI / 2;
    grid.position.set(box.center.x, box.center.y, box.min.z);
    g.add(grid);
    // Tracker frame axes, each with its letter (not colour alone).
    const len = niceLength(box.radius * 0.3);
    const axes: [THREE.Vector3, string, string][] = [
      [new THREE.Vector3(1, 0, 0), '#b42318', 'x'],
      [new THREE.Vector3(0, 1, 0), '#2f7d32', 'y'],
      [new THREE.Vector3(0, 0, 1), '#1f4fa3', 'z'],
    ];
    for (const [d, colour, name] of axes) {
      g.add(new THREE.Line(new THREE.BufferGeometry().setFromPoints([new THREE.Vector3(), d.clone().multiplyScalar(len)]), new THREE.LineBasicMaterial({ color: colour })));
      const s = label(name, box.radius * 0.07, colour);
      s.position.copy(d).multiplyScalar(len * 1.12);
      g.add(s);
    }
    // Scale bar on the floor, along x, with what it stands for in scene mm and in (magnified) error mm.
    const bar = niceLength(box.radius * 0.5);
    const y0 = box.min.y, z0 = box.min.z, x0 = box.min.x;
    const barGeom = new THREE.BufferGeometry().setFromPoints([
      new THREE.Vector3(x0, y0, z0), new THREE.Vector3(x0 + bar, y0, z0),
      new THREE.Vector3(x0, y0, z0), new THREE.Vector3(x0, y0, z0 + bar * 0.06),
      new THREE.Vector3(x0 + bar, y0, z0), new THREE.Vector3(x0 + bar, y0, z0 + bar * 0.06),
    ]);
    const barLines = new THREE.LineSegments(barGeom, new THREE.LineBasicMaterial({ color: INK }));
    barLines.name = 'scale-bar';
    g.add(barLines);
    const errText = magnification === 1 ? '' : ` = ${+(bar / magnification).toPrecision(3)} mm of error (×${magnification})`;
    const s = label(`${bar} mm${errText}`, box.radius * 0.07);
    s.position.set(x0 + bar / 2, y0, z0 + bar * 0.14);
    g.add(s);
    g.add(new THREE.AmbientLight('#ffffff', 1.4));
    const sun = new THREE.DirectionalLight('#ffffff', 1.6);
    sun.position.set(box.center.x + box.radius, box.center.y - box.radius, box.center.z + box.radius * 2);
    g.add(sun);
    return g;
  }, [box, magnification]);

  const highlight = useMemo(() => {
    const p = poses[selected];
    if (!p) return null;
    const ring = new THREE.Mesh(new THREE.SphereGeometry(r * 3.2, 16, 10), new THREE.MeshBasicMaterial({ color: HIGHLIGHT, wireframe: true }));
    ring.position.set(p.p[0], p.p[1], p.p[2]);
    ring.name = 'highlight';
    ring.userData.label = p.label;
    return ring;
  }, [poses, selected, r]);

  useEffect(() => {
    invalidate();
    // Report what the scene graph holds (after React has attached the primitives).
    const id = requestAnimationFrame(() => {
      const shapes: SceneInfo['shapes'] = {};
      let hl: string | null = null;
      let armLabel: string | null = null;
      scene.traverse((o) => {
        if (o instanceof THREE.InstancedMesh && o.userData.role) {
          const geom = o.geometry as THREE.BufferGeometry;
          shapes[o.userData.role as string] = { geometry: geom.name || geom.type, vertices: geom.getAttribute('position').count, count: o.count };
        }
        if (o.name === 'highlight') hl = o.userData.label as string;
        if (o.name === 'arm' && o.visible) armLabel = poses[armAt]?.label ?? null;
      });
      onInfo({ shapes, highlight: hl, armDrawnAt: armLabel });
    });
    return () => cancelAnimationFrame(id);
  }, [markers, highlight, arm, showArm, vectors, showVectors, furniture, scene, invalidate, onInfo, poses, armAt]);

  return (
    <>
      <Controls center={box.center} radius={box.radius} resetSignal={props.resetSignal} />
      <primitive object={furniture} />
      {markers.map(({ role, mesh, indices }) => (
        <primitive
          key={role}
          object={mesh}
          onClick={(e: { instanceId?: number; stopPropagation: () => void }) => {
            e.stopPropagation();
            if (e.instanceId !== undefined && indices[e.instanceId] !== undefined) onPick(indices[e.instanceId]!);
          }}
        />
      ))}
      {showVectors && <primitive object={vectors} />}
      {showArm && arm && <primitive object={arm} />}
      {highlight && <primitive object={highlight} />}
    </>
  );
}

export default function Scene(props: SceneProps) {
  return (
    <Canvas
      frameloop="demand"
      dpr={[1, 2]}
      // Keeps the last frame readable for printing and for screenshots of the page.
      gl={{ preserveDrawingBuffer: true, antialias: true }}
      camera={{ fov: 40 }}
      onCreated={({ gl }) => {
        gl.setClearColor('#ffffff');
        gl.domElement.addEventListener('webglcontextlost', props.onContextLost);
      }}
      role="img"
      aria-label="3-D view of the arm and the poses; drag to turn, wheel or pinch to zoom"
      data-view3d-canvas
    >
      <Content {...props} />
    </Canvas>
  );
}

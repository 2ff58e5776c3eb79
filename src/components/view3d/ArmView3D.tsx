/**
 * The 3-D view island: legend, controls and the pose list are plain React; the three.js scene (Scene.tsx)
 * is imported lazily, so its code is fetched only by pages that mount this island (and, with
 * client:visible, only once the view scrolls into sight). Without WebGL the list and the numbers remain.
 */
import { Component, lazy, Suspense, useCallback, useEffect, useMemo, useState, type ReactNode } from 'react';
import { autoMagnification } from './decimate';
import { ROLE_ORDER, ROLE_TEXT, type View3DProps, type View3DRole } from './types';
import type { SceneInfo } from './Scene';

const Scene = lazy(() => import('./Scene'));

const mm = (v: number) => v.toFixed(3);
const MAGNIFICATIONS = [1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10000];

function hasWebGL(): boolean {
  try {
    const c = document.createElement('canvas');
    return !!(c.getContext('webgl2') || c.getContext('webgl'));
  } catch {
    return false;
  }
}

class SceneBoundary extends Component<{ fallback: ReactNode; children: ReactNode }, { failed: boolean }> {
  state = { failed: false };
  static getDerivedStateFromError() {
    return { failed: true };
  }
  render() {
    return this.state.failed ? this.props.fallback : this.props.children;
  }
}

const errorOf = (e: [number, number, number] | null | undefined) => (e ? Math.hypot(e[0], e[1], e[2]) : null);

export default function ArmView3D({ geometry, poses, total, errorMeaning, initialPose, magnification, title = '3-D view', frameName = 'Tracker frame' }: View3DProps) {
  const [webgl, setWebgl] = useState<'unknown' | 'yes' | 'no'>('unknown');
  useEffect(() => setWebgl(hasWebGL() ? 'yes' : 'no'), []);
  const firstPick = useMemo(() => {
    const named = initialPose ? poses.findIndex((p) => p.label === initialPose) : -1;
    if (named >= 0) return named;
    let best = 0, top = -1;
    poses.forEach((p, i) => {
      const e = p.role === 'excluded' ? null : errorOf(p.e);
      if (e !== null && e > top) [best, top] = [i, e];
    });
    return best;
  }, [poses, initialPose]);
  const [selected, setSelected] = useState(firstPick);
  const extent = useMemo(() => {
    let lo = [Infinity, Infinity, Infinity], hi = [-Infinity, -Infinity, -Infinity];
    for (const p of poses) for (let k = 0; k < 3; k++) [lo[k], hi[k]] = [Math.min(lo[k]!, p.p[k]!), Math.max(hi[k]!, p.p[k]!)];
    return poses.length ? Math.hypot(hi[0]! - lo[0]!, hi[1]! - lo[1]!, hi[2]! - lo[2]!) : 0;
  }, [poses]);
  const auto = useMemo(() => magnification ?? autoMagnification(poses.filter((p) => p.role !== 'excluded'), extent), [poses, extent, magnification]);
  const [factor, setFactor] = useState(auto);
  const [showArm, setShowArm] = useState(true);
  const [showVectors, setShowVectors] = useState(true);
  const [reset, setReset] = useState(0);
  const [info, setInfo] = useState<SceneInfo | null>(null);
  const onInfo = useCallback((i: SceneInfo) => setInfo(i), []);
  const onLost = useCallback(() => setWebgl('no'), []);
  const hasVectors = poses.some((p) => p.e);
  const roles = ROLE_ORDER.filter((r) => poses.some((p) => p.role === r));
  const counts = Object.fromEntries(roles.map((r) => [r, poses.filter((p) => p.role === r).length])) as Record<View3DRole, number>;
  const pose = poses[selected];
  const factors = [...new Set([...MAGNIFICATIONS, auto])].sort((a, b) => a - b);

  const fallback = (
    <div className="notice notice-attention" data-view3d-fallback>
      <p className="font-semibold">▲ This browser offers no WebGL, so the 3-D view cannot be drawn.</p>
      <p>The pose list beside it and the charts and tables on this page carry the same numbers.</p>
    </div>
  );

  return (
    <section
      className="card mb-6 print-keep"
      data-view3d
      data-webgl={webgl}
      data-ready={info ? 'true' : undefined}
      data-highlight={info?.highlight ?? ''}
      data-arm-at={info?.armDrawnAt ?? ''}
      data-shapes={info ? JSON.stringify(info.shapes) : undefined}
      data-magnification={factor}
    >
      <h2 className="mb-1">{title}</h2>
      <p className="mb-2 text-sm text-ink-soft">
        {frameName}, mm, z up. {geometry ? 'The arm is drawn from its geometry by the engine’s forward kinematics, at the pose chosen in the list. ' : ''}
        {hasVectors && <>Error vectors ({errorMeaning ?? 'measured − predicted'}) start at the pose’s point and are magnified <strong>×{factor}</strong>; the scale bar on the floor says how long a millimetre of error is drawn. </>}
        {poses.length < total ? `${poses.length} of ${total} poses drawn: every excluded pose and outlier, the largest errors and an even sample of the rest.` : ''}
      </p>
      <ul className="mb-2 flex flex-wrap gap-x-4 gap-y-1 text-sm" aria-label="Legend">
        {roles.map((r) => (
          <li key={r} data-legend={r} data-shape={ROLE_TEXT[r].shape}>
            <span style={{ color: ROLE_TEXT[r].colour }} aria-hidden="true">{ROLE_TEXT[r].glyph}</span> {ROLE_TEXT[r].word} ({ROLE_TEXT[r].shape}, {counts[r]})
          </li>
        ))}
        {geometry && <li><span aria-hidden="true">▬</span> arm links, <span aria-hidden="true">▮</span> joint axes (dashed: axis line)</li>}
        <li><span aria-hidden="true" className="text-error">◯</span> chosen pose</li>
      </ul>
      <div className="grid gap-4 lg:grid-cols-[minmax(0,1fr)_18rem]">
        <div className="min-w-0">
          <div className="relative h-[360px] w-full overflow-hidden rounded border border-rule bg-white sm:h-[460px]" data-view3d-stage>
            {webgl === 'no' ? (
              <div className="p-4">{fallback}</div>
            ) : webgl === 'yes' ? (
              <SceneBoundary fallback={<div className="p-4">{fallback}</div>}>
                <Suspense fallback={<p className="p-4 text-ink-soft">Loading the 3-D view…</p>}>
                  <Scene poses={poses} geometry={geometry} selected={selected} magnification={factor} showArm={showArm} showVectors={showVectors} resetSignal={reset} onPick={setSelected} onInfo={onInfo} onContextLost={onLost} />
                </Suspense>
              </SceneBoundary>
            ) : (
              <p className="p-4 text-ink-soft">Loading the 3-D view…</p>
            )}
          </div>
          <div className="no-print mt-2 flex flex-wrap items-end gap-3">
            <button type="button" className="btn btn-quiet" onClick={() => setReset((n) => n + 1)} data-view3d-reset>
              ⟲ Reset view
            </button>
            {hasVectors && (
              <label className="field">
                <span>Error magnification</span>
                <select className="input" value={factor} onChange={(e) => setFactor(Number(e.target.value))} data-view3d-factor>
                  {factors.map((f) => <option key={f} value={f}>×{f}{f === auto ? ' (automatic)' : ''}</option>)}
                </select>
              </label>
            )}
            {geometry && (
              <label className="flex min-h-11 items-center gap-2">
                <input type="checkbox" className="h-5 w-5 accent-accent" checked={showArm} onChange={(e) => setShowArm(e.target.checked)} /> Arm
              </label>
            )}
            {hasVectors && (
              <label className="flex min-h-11 items-center gap-2">
                <input type="checkbox" className="h-5 w-5 accent-accent" checked={showVectors} onChange={(e) => setShowVectors(e.target.checked)} /> Error vectors
              </label>
            )}
            <p className="text-sm text-ink-soft">Drag to turn, right-drag or two fingers to move, wheel or pinch to zoom; click a point to choose its pose.</p>
          </div>
        </div>
        <div className="min-w-0">
          {pose && (
            <dl className="mb-2 grid grid-cols-[auto_minmax(0,1fr)] gap-x-3 text-sm" data-view3d-chosen>
              <dt className="text-ink-soft">Pose</dt><dd className="break-all font-semibold">{pose.label}</dd>
              <dt className="text-ink-soft">Role</dt><dd>{ROLE_TEXT[pose.role].glyph} {ROLE_TEXT[pose.role].word}</dd>
              <dt className="text-ink-soft">Point (mm)</dt><dd className="tabular-nums">{pose.p.map(mm).join(', ')}</dd>
              {pose.e && <><dt className="text-ink-soft">Error (mm)</dt><dd className="tabular-nums">{pose.e.map(mm).join(', ')} · |e| {mm(errorOf(pose.e)!)}</dd></>}
              {pose.q && <><dt className="text-ink-soft">Joints</dt><dd className="break-words tabular-nums">{pose.q.map((v) => v.toFixed(4)).join(', ')}</dd></>}
            </dl>
          )}
          <p className="mb-1 text-sm font-semibold" id="view3d-list">Poses ({poses.length})</p>
          <ul className="max-h-[300px] overflow-auto rounded border border-rule bg-white text-sm" aria-labelledby="view3d-list" data-view3d-list>
            {poses.map((p, i) => {
              const e = errorOf(p.e);
              return (
                <li key={i}>
                  <button
                    type="button"
                    className={`flex min-h-11 w-full items-center gap-2 px-2 text-left ${i === selected ? 'bg-accent-soft font-semibold' : 'hover:bg-paper'}`}
                    aria-pressed={i === selected}
                    data-pose-label={p.label}
                    data-role={p.role}
                    data-shape={ROLE_TEXT[p.role].shape}
                    onClick={() => setSelected(i)}
                  >
                    <span style={{ color: ROLE_TEXT[p.role].colour }} aria-hidden="true">{ROLE_TEXT[p.role].glyph}</span>
                    <span className="min-w-0 flex-1 truncate">{p.label}</span>
                    <span className="sr-only">{ROLE_TEXT[p.role].word}</span>
                    {e !== null && <span className="tabular-nums text-ink-soft">{mm(e)} mm</span>}
                  </button>
                </li>
              );
            })}
          </ul>
        </div>
      </div>
    </section>
  );
}

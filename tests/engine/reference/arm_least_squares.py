"""Reference fit of an arm's geometric parameters with SciPy's least_squares (method='lm', MINPACK).

Reads JSON on stdin:
  convention: "dh" | "mdh"; prismatic: [0|1 per joint]; v0: full parameter vector (mm, rad; layout of
  src/lib/engine/parameters.ts: 5 per joint [a, alpha, d, theta, beta], base 6, tool 6);
  active: indices of v0 to fit; q: joint values per pose (rad / mm); measured: [x, y, z] per pose (mm);
  jac: "2-point" (finite differences, independent of the engine's derivation) or "analytic";
  ftol, xtol, gtol (optional, default 1e-8 as SciPy); repeat (optional, timing runs).
Writes JSON on stdout: x (active values), cost (0.5 * sum r^2), nfev, njev, status, seconds and
cpu_seconds (best run, wall clock and process CPU time).

Forward kinematics here is an independent, vectorised NumPy implementation: every pose's chain is
composed from 4x4 elementary transforms exactly as the geometry file defines them; the analytic
Jacobian records, before each elementary transform, the frame it acts in (translation: the axis;
rotation: axis x (p - origin)).
"""
import json
import sys
import time

import numpy as np
from scipy.optimize import least_squares


def elementary(kind, axis, value):
    """(N,4,4) transforms for per-pose values (N,)."""
    n = value.shape[0]
    T = np.zeros((n, 4, 4))
    T[:, 0, 0] = T[:, 1, 1] = T[:, 2, 2] = T[:, 3, 3] = 1.0
    if kind == "T":
        T[:, axis, 3] = value
        return T
    c, s = np.cos(value), np.sin(value)
    i, j = [(1, 2), (2, 0), (0, 1)][axis]
    T[:, i, i] = c
    T[:, i, j] = -s
    T[:, j, i] = s
    T[:, j, j] = c
    return T


def chain(conv, prismatic, v, q):
    """List of (kind, axis, param index or None, values (N,)) elementary steps for every pose."""
    n_j = len(prismatic)
    N = q.shape[0]
    full = lambda x: np.full(N, x)
    steps = []
    b = 5 * n_j
    steps += [("T", 0, b, full(v[b])), ("T", 1, b + 1, full(v[b + 1])), ("T", 2, b + 2, full(v[b + 2])),
              ("R", 2, b + 5, full(v[b + 5])), ("R", 1, b + 4, full(v[b + 4])), ("R", 0, b + 3, full(v[b + 3]))]
    for i in range(n_j):
        p = 5 * i
        a, alpha, d, theta, beta = (full(v[p + k]) for k in range(5))
        if prismatic[i]:
            d = d + q[:, i]
        else:
            theta = theta + q[:, i]
        rz, tz, tx, rx, ry = ("R", 2, p + 3, theta), ("T", 2, p + 2, d), ("T", 0, p, a), ("R", 0, p + 1, alpha), ("R", 1, p + 4, beta)
        steps += [rz, tz, tx, rx, ry] if conv == "dh" else [rx, tx, ry, rz, tz]
    t = b + 6
    steps += [("T", 0, t, full(v[t])), ("T", 1, t + 1, full(v[t + 1])), ("T", 2, t + 2, full(v[t + 2]))]
    return steps


def forward(conv, prismatic, v, q, want_jac=False, active=None):
    N = q.shape[0]
    M = np.tile(np.eye(4), (N, 1, 1))
    records = {}
    for kind, axis, idx, val in chain(conv, prismatic, v, q):
        if want_jac and idx is not None:
            records[idx] = (kind, M[:, :3, axis].copy(), M[:, :3, 3].copy())
        M = M @ elementary(kind, axis, val)
    p = M[:, :3, 3]
    if not want_jac:
        return p, None
    J = np.zeros((N, 3, len(active)))
    for k, idx in enumerate(active):
        kind, u, o = records[idx]
        J[:, :, k] = u if kind == "T" else np.cross(u, p - o)
    return p, J


def main():
    cfg = json.load(sys.stdin)
    conv = cfg["convention"]
    prismatic = cfg["prismatic"]
    v0 = np.array(cfg["v0"], dtype=float)
    active = cfg["active"]
    q = np.array(cfg["q"], dtype=float)
    meas = np.array(cfg["measured"], dtype=float)
    jac_mode = cfg.get("jac", "2-point")
    tol = dict(ftol=cfg.get("ftol", 1e-8), xtol=cfg.get("xtol", 1e-8), gtol=cfg.get("gtol", 1e-8))

    def vec(x):
        v = v0.copy()
        v[active] = x
        return v

    def fun(x):
        p, _ = forward(conv, prismatic, vec(x), q)
        return (p - meas).ravel()

    def jac(x):
        _, J = forward(conv, prismatic, vec(x), q, True, active)
        return J.reshape(-1, len(active))

    x0 = v0[active]
    best = None
    best_cpu = None
    result = None
    for _ in range(int(cfg.get("repeat", 1))):
        t0, c0 = time.perf_counter(), time.process_time()
        result = least_squares(fun, x0, jac=jac if jac_mode == "analytic" else "2-point", method="lm", x_scale="jac", **tol)
        dt, dc = time.perf_counter() - t0, time.process_time() - c0
        best = dt if best is None else min(best, dt)
        best_cpu = dc if best_cpu is None else min(best_cpu, dc)
    json.dump({"x": result.x.tolist(), "cost": float(result.cost), "nfev": int(result.nfev),
               "njev": int(result.njev) if result.njev is not None else None,
               "status": int(result.status), "seconds": best, "cpu_seconds": best_cpu}, sys.stdout)


if __name__ == "__main__":
    main()

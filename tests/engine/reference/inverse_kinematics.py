"""Reference inverse kinematics with SciPy's least_squares (method='trf' with the joint limits as bounds).

Reads JSON on stdin:
  convention: "dh" | "mdh"; prismatic: [0|1 per joint]; v: full parameter vector (mm, rad; layout of
  src/lib/engine/parameters.ts: 5 per joint [a, alpha, d, theta, beta], base 6, tool 6);
  lower, upper: joint limits (rad / mm; null = none); scale: L (mm) weighing orientation;
  targets: [{position: [3], rotation: [9 row-major] | null, seed: [n] (rad / mm)}]; repeat (optional).
Writes JSON on stdout: q per target (rad / mm), cost per target, seconds (wall clock of the best run).

Forward kinematics here is independent of the engine: the pose is composed from 4x4 elementary
transforms exactly as the geometry file defines them (B = Txyz Rz Ry Rx, joint transforms per convention,
T = Txyz Rz Ry Rx). The residual is [p* - p, L * rotvec(R* R^T)] with SciPy's Rotation.as_rotvec, the
Jacobian SciPy's own finite differences ('2-point').
"""
import json
import sys
import time

import numpy as np
from scipy.optimize import least_squares
from scipy.spatial.transform import Rotation


def rot(axis, a):
    c, s = np.cos(a), np.sin(a)
    T = np.eye(4)
    i, j = [(1, 2), (2, 0), (0, 1)][axis]
    T[i, i] = c
    T[i, j] = -s
    T[j, i] = s
    T[j, j] = c
    return T


def trans(axis, d):
    T = np.eye(4)
    T[axis, 3] = d
    return T


def frame(v, o):
    return trans(0, v[o]) @ trans(1, v[o + 1]) @ trans(2, v[o + 2]) @ rot(2, v[o + 5]) @ rot(1, v[o + 4]) @ rot(0, v[o + 3])


def pose(conv, prismatic, v, q):
    n = len(prismatic)
    M = frame(v, 5 * n)
    for i in range(n):
        a, alpha, d, theta, beta = v[5 * i: 5 * i + 5]
        if prismatic[i]:
            d = d + q[i]
        else:
            theta = theta + q[i]
        if conv == "dh":
            M = M @ rot(2, theta) @ trans(2, d) @ trans(0, a) @ rot(0, alpha) @ rot(1, beta)
        else:
            M = M @ rot(0, alpha) @ trans(0, a) @ rot(1, beta) @ rot(2, theta) @ trans(2, d)
    return M @ frame(v, 5 * n + 6)


def main():
    cfg = json.load(sys.stdin)
    conv, prismatic, v = cfg["convention"], cfg["prismatic"], np.array(cfg["v"], dtype=float)
    L = float(cfg["scale"])
    lo = np.array([-np.inf if x is None else x for x in cfg["lower"]])
    hi = np.array([np.inf if x is None else x for x in cfg["upper"]])
    best, out = None, None
    for _ in range(int(cfg.get("repeat", 1))):
        t0 = time.perf_counter()
        out = []
        for t in cfg["targets"]:
            p_star = np.array(t["position"])
            R_star = None if t["rotation"] is None else np.array(t["rotation"]).reshape(3, 3)

            def fun(q):
                M = pose(conv, prismatic, v, q)
                r = p_star - M[:3, 3]
                if R_star is None:
                    return r
                w = Rotation.from_matrix(R_star @ M[:3, :3].T).as_rotvec()
                return np.concatenate([r, L * w])

            x0 = np.clip(np.array(t["seed"], dtype=float), lo, hi)
            res = least_squares(fun, x0, jac="2-point", method="trf", bounds=(lo, hi), ftol=1e-15, xtol=1e-15, gtol=1e-15)
            out.append({"q": res.x.tolist(), "cost": float(res.cost)})
        dt = time.perf_counter() - t0
        best = dt if best is None else min(best, dt)
    json.dump({"results": out, "seconds": best}, sys.stdout)


if __name__ == "__main__":
    main()

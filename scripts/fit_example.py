#!/usr/bin/env python3
"""Fit observed line strengths with a linegrid grid file using only h5py and scipy.

    scripts/fit_example.py GRID OBSERVED.csv [--fix AXIS=VALUE ...] [--method linear|cubic|pchip]

OBSERVED.csv has the header line,value,uncertainty (value in the units of the dataset,
equivalent_width by default). The grid's axes are interpolated in the same coordinates
`linegrid sample`/`fit` use by default: theta = 5040/T for temperature, log10 for positive
axes spanning more than a decade, linear otherwise; the value in log10. Nodes whose status
is not 0 are NaN, so a fit that needs them fails loudly instead of using them.
The fit is scipy.optimize.least_squares (trust-region reflective, bounded to the grid) from
several seeded starts; uncertainties come from (J^T J)^-1 (one-sided differences on
each side of the minimum; on a node of a linear table, where the slope jumps, the larger
of the one-sided covariances).
"""
import argparse
import csv
import itertools

import h5py
import numpy as np
from scipy.interpolate import RegularGridInterpolator
from scipy.optimize import least_squares


def coordinate(name, values):
    v = np.asarray(values, dtype=float)
    if name == "temperature" and v.min() > 0:
        return "theta", 5040.0 / v
    if v.min() > 0 and v.max() / v.min() > 10:
        return "log10", np.log10(v)
    return "linear", v


def to_coord(kind, x):
    return {"theta": lambda t: 5040.0 / t, "log10": np.log10, "linear": lambda t: t}[kind](x)


def from_coord(kind, u):
    return {"theta": lambda t: 5040.0 / t, "log10": lambda t: 10.0**t, "linear": lambda t: t}[kind](u)


def covariance(residuals, z, lo, hi, rel_step=1e-6, kink=1e-3):
    """(J^T J)^-1 in the interpolation coordinates at z, or None if unconstrained.

    J by one-sided differences below and above z on each free axis, each from two points on
    its own side (z - 2h, z - h and z + h, z + 2h), so that neither blends the two slopes
    when z lies within h of a node. Where the two differ by more than `kink` relative (a node
    of a multilinear table, where the slope jumps), both sides are tried in every
    combination and the largest covariance (smallest det J^T J) is kept, so that the answer
    does not depend on the side the minimiser ended on; where they agree, their mean (a
    central difference) is used. If any combination leaves J^T J singular, or a difference
    is not finite, the answer is None.
    """
    sides = []
    for j in range(len(z)):
        h = rel_step * (hi[j] - lo[j])
        cols = []
        for step in (-h, h):
            near, far = z.copy(), z.copy()
            near[j] = np.clip(z[j] + step, lo[j], hi[j])
            far[j] = np.clip(z[j] + 2 * step, lo[j], hi[j])
            if far[j] == near[j]:
                continue  # at the box's edge on this side
            cols.append((residuals(far) - residuals(near)) / (far[j] - near[j]))
        if not cols or not all(np.all(np.isfinite(c)) for c in cols):
            return None
        scale = max(np.abs(c).max() for c in cols)
        if len(cols) == 2 and scale > 0 and np.abs(cols[0] - cols[1]).max() > kink * scale:
            sides.append(cols)
        else:
            sides.append([sum(cols) / len(cols)])
    best = None
    for pick in itertools.product(*[range(len(c)) for c in sides]):
        jac = np.column_stack([sides[j][k] for j, k in enumerate(pick)])
        a = jac.T @ jac
        try:
            np.linalg.cholesky(a)  # raises unless positive definite
        except np.linalg.LinAlgError:
            return None
        det = np.linalg.det(a)
        if best is None or det < best[0]:
            best = (det, a)
    return np.linalg.inv(best[1])


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("grid")
    ap.add_argument("observed")
    ap.add_argument("--dataset", default="equivalent_width")
    ap.add_argument("--fix", action="append", default=[], metavar="AXIS=VALUE")
    # scipy's "cubic" and "pchip" are its own schemes (not linegrid's Catmull-Rom Hermite)
    # and need at least 4 nodes per axis; "linear" matches `linegrid fit --method linear`.
    ap.add_argument("--method", default="linear", choices=["linear", "cubic", "pchip"])
    ap.add_argument("--starts", type=int, default=16)
    ap.add_argument("--seed", type=int, default=1)
    a = ap.parse_args()

    with h5py.File(a.grid, "r") as f:
        names = f.attrs["axes"]
        axes = (names.decode() if isinstance(names, bytes) else str(names)).split()
        nodes = [f[n][...] for n in axes]
        labels = [s.decode() if isinstance(s, bytes) else str(s) for s in f["lines/label"][...]]
        data = f[a.dataset][...]
        status = f["status"][...]
    rows = list(csv.DictReader(open(a.observed)))
    obs = np.array([float(r["value"]) for r in rows])
    sig = np.array([float(r["uncertainty"]) for r in rows])

    kinds, coords, order = [], [], []
    for n, v in zip(axes, nodes):
        k, u = coordinate(n, v)
        o = np.argsort(u)
        kinds.append(k)
        coords.append(u[o])
        order.append(o)
    interps = []
    for r in rows:
        y = np.log10(np.where(status == 0, data[..., labels.index(r["line"])], np.nan))
        for d, o in enumerate(order):
            y = np.take(y, o, axis=d)
        interps.append(RegularGridInterpolator(coords, y, method=a.method))

    fixed = {}
    for s in a.fix:
        k, v = s.split("=")
        fixed[axes.index(k)] = float(v)
    free = [d for d in range(len(axes)) if d not in fixed]
    lo = np.array([coords[d][0] for d in free])
    hi = np.array([coords[d][-1] for d in free])

    def point(z):
        u = [0.0] * len(axes)
        for d, val in fixed.items():
            u[d] = to_coord(kinds[d], val)
        for j, d in enumerate(free):
            u[d] = z[j]
        return np.array(u)

    def residuals(z):
        p = point(z)
        return np.array([(10.0 ** ip(p)[0] - y) / s for ip, y, s in zip(interps, obs, sig)])

    rng = np.random.default_rng(a.seed)
    best = []
    for _ in range(a.starts):
        z0 = lo + (hi - lo) * rng.uniform(size=len(free))
        try:
            r = least_squares(residuals, z0, bounds=(lo, hi), method="trf")
        except ValueError:
            continue  # the start touched a flagged (NaN) node
        chi2 = float(np.sum(r.fun**2))
        if not any(np.all(np.abs(r.x - b[0]) <= 0.03 * (hi - lo)) for b in best):
            best.append((r.x, chi2, r.jac))
    best.sort(key=lambda b: b[1])
    for i, (z, chi2, _) in enumerate(best):
        print(f"minimum {i + 1}: chi2 = {chi2:.4f}")
        cov_u = covariance(residuals, z, lo, hi)
        for j, d in enumerate(free):
            x = from_coord(kinds[d], z[j])
            if cov_u is None:
                print(f"  {axes[d]:<16} {x:14.6f} ± unconstrained")
                continue
            # sigma_x = |dx/du| sigma_u
            dxdu = {"theta": -x * x / 5040.0, "log10": x * np.log(10.0), "linear": 1.0}[kinds[d]]
            print(f"  {axes[d]:<16} {x:14.6f} ± {abs(dxdu) * np.sqrt(cov_u[j, j]):.4f}")
        for d, v in fixed.items():
            print(f"  {axes[d]:<16} {v:14.6f}  (fixed)")


if __name__ == "__main__":
    main()

#!/usr/bin/env python3
"""Cross-check linegrid's interpolation and fitting against scipy on a grid file.

Usage: check_interp.py --binary target/release/linegrid GRID.h5

1. Multilinear: `linegrid sample --method linear --no-log-value` (the value itself, not the
   default log10) with every axis in its linear coordinate against scipy.interpolate.RegularGridInterpolator(method="linear") built from the file's
   axes and data, at seeded random points inside the grid, for every line; tolerance 1e-12
   relative (reference: scipy.interpolate.RegularGridInterpolator).
2. Fit: scripts/fit_example.py (h5py + scipy only) against `linegrid fit --method linear
   --log-value` on observations synthesised from the grid at a node; the best temperatures
   must agree within the larger of the two 1-sigma uncertainties (common practice, no source),
   and, the minimum being on a node where the multilinear slope jumps, both uncertainties are
   the larger one-sided one and agree to 1e-3 (our contract).

Prints PASS/FAIL lines and "N passed, M failed"; exits 1 on any failure.
"""
import argparse
import csv
import io
import json
import os
import re
import subprocess
import sys
import tempfile

import h5py
import numpy as np
from scipy.interpolate import RegularGridInterpolator

RESULTS = {"passed": 0, "failed": 0}


def check(name, ok, detail=""):
    RESULTS["passed" if ok else "failed"] += 1
    print(f"{'PASS' if ok else 'FAIL'} {name}: {detail}", flush=True)


def multilinear(binary, path):
    f = h5py.File(path, "r")
    axes = [a for a in f.attrs["axes"].split()] if isinstance(f.attrs["axes"], str) else list(f.attrs["axes"])
    axes = [a.decode() if isinstance(a, bytes) else a for a in axes]
    nodes = [f[a][()] for a in axes]
    labels = list(f["lines/label"].asstr()[()])
    ew = f["equivalent_width"][()]
    status = f["status"][()]
    if not (status == 0).all():
        check("interp.multilinear", False, "the grid has flagged points; use a fully converged grid")
        return
    rng = np.random.default_rng(20261202)
    pts = np.column_stack([rng.uniform(n[0], n[-1], 40) for n in nodes])
    with tempfile.NamedTemporaryFile("w", suffix=".csv", delete=False) as tmp:
        tmp.write(",".join(axes) + "\n")
        for p in pts:
            tmp.write(",".join(repr(float(x)) for x in p) + "\n")
        name = tmp.name
    coords = []
    for a in axes:
        coords += ["--coord", f"{a}=linear"]
    cmd = [binary, "sample", path, "--points", name, "--method", "linear", "--no-log-value", "--json"] + coords
    out = subprocess.run(cmd, capture_output=True, text=True)
    os.unlink(name)
    if out.returncode != 0:
        check("interp.multilinear", False, out.stderr.strip()[:500])
        return
    got = json.loads(out.stdout)
    rows = got["samples"]
    worst, where = 0.0, ""
    for j, label in enumerate(labels):
        ref = RegularGridInterpolator(nodes, ew[..., j], method="linear")(pts)
        for i, p in enumerate(pts):
            mine = find_value(rows, i, label)
            if mine is None:
                check("interp.multilinear", False, f"no value for point {i} line {label} in the JSON")
                return
            rel = abs(mine - ref[i]) / max(abs(ref[i]), 1e-300)
            if rel > worst:
                worst, where = rel, f"{label} at {dict(zip(axes, p))}"
    check(
        "interp.multilinear",
        worst <= 1e-12,
        f"max relative difference {worst:.2e} over {len(pts)} points x {len(labels)} lines"
        f" ({where}); tol 1e-12; reference: scipy.interpolate.RegularGridInterpolator",
    )


def find_value(rows, i, label):
    """The sampled value of point i and line `label` in linegrid's JSON (list of records)."""
    if isinstance(rows, list):
        matches = [r for r in rows if r.get("line") == label]
        if len(matches) > i and "value" in matches[i]:
            return float(matches[i]["value"])
        for r in rows:
            if r.get("index") == i and r.get("line") == label:
                return float(r["value"])
    return None


def fit(binary, path, root):
    f = h5py.File(path, "r")
    labels = list(f["lines/label"].asstr()[()])
    ew = f["equivalent_width"][()]
    # Observations at a node: T index 6, P index 2, [M/H] index 2, lines H-beta and Ca II K.
    pick = ["H-beta", "Ca II K"]
    idx = (6, 2, 2)
    fixed = {"gas_pressure": float(f["gas_pressure"][idx[1]]), "metallicity": float(f["metallicity"][idx[2]])}
    with tempfile.NamedTemporaryFile("w", suffix=".csv", delete=False) as tmp:
        tmp.write("line,value,uncertainty\n")
        for lab in pick:
            v = float(ew[idx + (labels.index(lab),)])
            tmp.write(f"{lab},{v!r},{0.03 * v!r}\n")
        obs = tmp.name
    fixes = []
    for k, v in fixed.items():
        fixes += ["--fix", f"{k}={v!r}"]
    a = subprocess.run([binary, "fit", path, obs, "--method", "linear", "--log-value", "--json"] + fixes,
                       capture_output=True, text=True)
    b = subprocess.run([sys.executable, os.path.join(root, "scripts", "fit_example.py"), path, obs] + fixes,
                       capture_output=True, text=True)
    os.unlink(obs)
    if a.returncode != 0 or b.returncode != 0:
        check("fit.agreement", False, (a.stderr + b.stderr).strip()[:500])
        return
    ja = json.loads(a.stdout)
    best = ja["minima"][0]
    t_lg = best["parameters"]["temperature"]["value"] if isinstance(best["parameters"], dict) else None
    s_lg = best["parameters"]["temperature"].get("uncertainty") if t_lg is not None else None
    m = re.search(r"temperature\s+([-+0-9.eE]+)\s+±\s+([-+0-9.eE]+)", b.stdout)
    if t_lg is None or m is None:
        check("fit.agreement", False, f"could not read the results: {a.stdout[:300]} | {b.stdout[:300]}")
        return
    t_py, s_py = float(m.group(1)), float(m.group(2))
    tol = max(s_lg or 0.0, s_py)
    t_true = float(f["temperature"][idx[0]])
    check(
        "fit.agreement",
        abs(t_lg - t_py) <= tol and abs(t_lg - t_true) <= 2 * tol,
        f"linegrid fit T = {t_lg:.3f} ± {s_lg}, fit_example.py T = {t_py:.3f} ± {s_py}, truth {t_true:.3f}",
    )
    # The minimum sits on a node, where the linear interpolant's slope jumps: both take the
    # larger one-sided uncertainty (analytic gradients against one-sided differences of
    # relative step 1e-6), so they agree to 1e-3 whichever side either minimiser ends on.
    check(
        "fit.uncertainty_at_a_node",
        s_lg is not None and abs(s_lg / s_py - 1.0) <= 1e-3,
        f"linegrid ± {s_lg}, fit_example.py ± {s_py}",
    )


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--binary", required=True)
    ap.add_argument("grid")
    a = ap.parse_args()
    root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
    for fam in (multilinear, lambda b, p: fit(b, p, root)):
        try:
            fam(a.binary, a.grid)
        except Exception as e:  # a crash is a failure of that family, not of the script
            check("interp.family", False, f"{type(e).__name__}: {e}")
    print(f"{RESULTS['passed']} passed, {RESULTS['failed']} failed")
    return 1 if RESULTS["failed"] else 0


if __name__ == "__main__":
    sys.exit(main())

#!/usr/bin/env python3
"""Check a linegrid grid file from the outside: h5py, xarray (h5netcdf engine) and scipy.

Usage: check_store.py GRID.h5 [GRID.h5 ...]

For each file: every data dataset's dimensions are attached to the axis scales in order
(``ds.dims[i][0]``), the line table reads as text with ``.asstr()``, xarray opens the root and
the ``lines`` and ``progress`` groups with named dimensions and no ``phony_dims``, and a
``scipy.interpolate.RegularGridInterpolator`` built from the axes reproduces the stored values
at the nodes. Files with ``complete = 0`` are checked for NaN / status 255 where pencils are
not done instead of interpolated.

Prints PASS/FAIL lines and "N passed, M failed"; exits 1 on any failure.

Needs h5py, xarray, h5netcdf, numpy, scipy.
"""

import sys
import traceback
import warnings

import h5py
import numpy as np
import xarray as xr
from scipy.interpolate import RegularGridInterpolator

RESULTS = {"passed": 0, "failed": 0}


def check(name, ok, detail=""):
    key = "passed" if ok else "failed"
    RESULTS[key] += 1
    print(f"{'PASS' if ok else 'FAIL'}: {name}" + (f" ({detail})" if detail else ""))
    return ok


def guarded(name, fn):
    """Runs fn(); an exception counts as one failure named `name`."""
    try:
        fn()
    except Exception as e:  # noqa: BLE001 - report and go on
        check(name, False, f"{type(e).__name__}: {e}")
        traceback.print_exc(limit=3)


def text_attr(obj, name):
    v = obj.attrs[name]
    return v.decode() if isinstance(v, bytes) else str(v)


def check_h5py(path, meta):
    with h5py.File(path, "r") as f:
        axes = meta["axes"]
        check(f"{path}: tool attribute", text_attr(f, "tool") == "linegrid")
        for a in axes:
            ds = f[a]
            check(
                f"{path}: axis {a} is a dimension scale with units",
                h5py.h5ds.is_scale(ds.id) and "units" in ds.attrs and ds.ndim == 1,
            )
        check(f"{path}: line is a dimension scale", h5py.h5ds.is_scale(f["line"].id))
        for v in meta["variables"]:
            ds = f[v]
            want = ["/" + a for a in axes] + (["/line"] if ds.ndim == len(axes) + 1 else [])
            got = [ds.dims[i][0].name if len(ds.dims[i]) else None for i in range(ds.ndim)]
            check(f"{path}: {v} dims {got}", got == want, f"want {want}")
            labels = [ds.dims[i].label for i in range(ds.ndim)]
            check(f"{path}: {v} has units and long_name",
                  "units" in ds.attrs and "long_name" in ds.attrs)
            check(f"{path}: {v} chunked one pencil per chunk",
                  ds.chunks == (1,) * (len(axes) - 1) + ds.shape[len(axes) - 1:],
                  f"chunks {ds.chunks}, labels {labels}")
            # Deflate (with shuffle) unless the grid was written with compression 0.
            check(f"{path}: {v} filters", (ds.compression, ds.shuffle) in (("gzip", True),
                                                                        (None, False)),
                  f"compression {ds.compression} level {ds.compression_opts}, "
                  f"shuffle {ds.shuffle}")
        lines = f["lines"]
        n = f["line"].shape[0]
        for col in ("label", "species", "family"):
            vals = lines[col].asstr()[()]
            check(f"{path}: lines/{col} reads as str",
                  len(vals) == n and all(isinstance(s, str) for s in vals), repr(list(vals[:3])))
            check(f"{path}: lines/{col} on dim /line", lines[col].dims[0][0].name == "/line")
        for col in ("wavelength_vac_nm", "wavelength_air_nm", "lower_cm", "upper_cm", "log_gf"):
            ds = lines[col]
            check(f"{path}: lines/{col} f64 [line] with units",
                  ds.dtype == np.float64 and ds.shape == (n,) and "units" in ds.attrs)
        done = f["progress/done"]
        check(f"{path}: progress/done on dim pencil",
              done.dims[0][0].name == "/progress/pencil")


def check_xarray(path, meta):
    axes = meta["axes"]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        with xr.open_dataset(path, engine="h5netcdf") as ds:
            print(f"--- xarray root of {path}:\n{ds}\n---")
            check(f"{path}: xarray dims are the axes and line",
                  set(ds.sizes) == set(axes) | {"line"}, str(dict(ds.sizes)))
            check(f"{path}: no phony dims", not any(d.startswith("phony_dim") for d in ds.sizes))
            check(f"{path}: axes and line are coordinates",
                  all(a in ds.coords for a in axes + ["line"]), str(list(ds.coords)))
            check(f"{path}: data variables",
                  sorted(ds.data_vars) == sorted(meta["variables"]), str(list(ds.data_vars)))
            with h5py.File(path, "r") as f:
                for v in meta["variables"]:
                    da = ds[v]
                    want = tuple(axes) + (("line",) if f[v].ndim == len(axes) + 1 else ())
                    check(f"{path}: xarray {v}.dims", da.dims == want, f"{da.dims} vs {want}")
                    same = np.array_equal(da.values, f[v][()], equal_nan=True)
                    check(f"{path}: xarray {v} values equal h5py's", same)
                    check(f"{path}: xarray {v} keeps dtype", da.dtype == f[v].dtype,
                          str(da.dtype))
                    check(f"{path}: xarray {v} units attr", "units" in da.attrs)
                for a in axes:
                    check(f"{path}: coordinate {a} values",
                          np.array_equal(ds[a].values, f[a][()]) and "units" in ds[a].attrs)
        with xr.open_dataset(path, engine="h5netcdf", group="lines") as lines:
            print(f"--- xarray group lines:\n{lines}\n---")
            check(f"{path}: xarray lines group dims", dict(lines.sizes) == {"line": meta["n_lines"]},
                  str(dict(lines.sizes)))
            check(f"{path}: xarray lines.label is text",
                  all(isinstance(s, str) for s in lines["label"].values))
        with xr.open_dataset(path, engine="h5netcdf", group="progress") as prog:
            check(f"{path}: xarray progress group: done(pencil), no pencil variable",
                  prog["done"].dims == ("pencil",) and "pencil" not in prog.variables,
                  str(prog))
        if hasattr(xr, "open_datatree"):
            tree = xr.open_datatree(path, engine="h5netcdf")
            check(f"{path}: xarray open_datatree groups",
                  {"lines", "progress"} <= set(tree.children), str(list(tree.children)))
            tree.close()
    msgs = [str(w.message) for w in caught if "h5netcdf" in str(w.filename) or
            "phony" in str(w.message) or "dimension" in str(w.message).lower()]
    check(f"{path}: no h5netcdf warnings", not msgs, "; ".join(msgs))


def check_values(path, meta):
    axes = meta["axes"]
    with h5py.File(path, "r") as f:
        points = [f[a][()] for a in axes]
        complete = int(f.attrs["complete"]) == 1
        done = f["progress/done"][()].astype(bool)
        status = f[meta["status"]][()]
        outer = tuple(len(p) for p in points[:-1])
        done_grid = done.reshape(outer)
        if not complete:
            ok = np.all((status == 255) == ~done_grid[..., None])
            check(f"{path}: incomplete: status 255 exactly on pencils not done", bool(ok))
            for v in meta["float_variables"]:
                data = f[v][()]
                nan = np.isnan(data)
                if data.ndim == len(axes) + 1:
                    nan = nan.all(axis=-1)
                check(f"{path}: incomplete: {v} NaN exactly on pencils not done",
                      bool(np.all(nan == ~done_grid[..., None])))
            return
        check(f"{path}: complete file has every pencil done", bool(done.all()))
        mesh = np.stack(np.meshgrid(*points, indexing="ij"), axis=-1).reshape(-1, len(axes))
        for v in meta["float_variables"]:
            data = f[v][()]
            interp = RegularGridInterpolator(points, data, method="linear")
            at_nodes = interp(mesh).reshape(data.shape)
            err = np.max(np.abs(at_nodes - data) / np.maximum(np.abs(data), 1e-300))
            check(f"{path}: interpolator reproduces {v} at nodes", err <= 1e-13,
                  f"max rel err {err:.2e}")
            # Half way between the first two nodes of the first axis: the mean of the two.
            if len(points[0]) > 1:
                mid = mesh[: int(np.prod(data.shape[1:len(axes)]))].copy()
                mid[:, 0] = 0.5 * (points[0][0] + points[0][1])
                got = interp(mid).reshape((1,) + data.shape[1:])
                want = 0.5 * (data[0:1] + data[1:2])
                check(f"{path}: {v} midpoint along {axes[0]} is the mean",
                      np.allclose(got, want, rtol=1e-12, atol=0))


def describe(path):
    with h5py.File(path, "r") as f:
        axes = text_attr(f, "axes").split()
        variables = text_attr(f, "data_variables").split()
        status = [v for v in variables if f[v].dtype == np.uint8]
        return {
            "axes": axes,
            "variables": variables,
            "float_variables": [v for v in variables if f[v].dtype == np.float64],
            "status": status[0],
            "n_lines": f["line"].shape[0],
        }


def main(paths):
    if not paths:
        print(__doc__)
        return 2
    for path in paths:
        meta = describe(path)
        guarded(f"{path}: h5py checks", lambda: check_h5py(path, meta))
        guarded(f"{path}: xarray checks", lambda: check_xarray(path, meta))
        guarded(f"{path}: value checks", lambda: check_values(path, meta))
    print(f"{RESULTS['passed']} passed, {RESULTS['failed']} failed")
    return 1 if RESULTS["failed"] else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))

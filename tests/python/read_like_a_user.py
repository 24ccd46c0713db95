#!/usr/bin/env python3
"""Reads exobound's exosphere.nc the way a user would: xarray with its default decoding.

Why this exists: a CF-valid file can still trip users. This script opens the file with
decode_times and everything else at xarray's defaults (scipy backend: no netCDF C library)
and checks that: the time coordinates decode to dates and local_time stays a plain number
(not a timedelta); coordinates are exact decimals, so `ds.column.sel(latitude=5,
local_time=10.5)` works; every coordinate names a bounds variable (CF Conventions 1.8,
section 7.1) whose cells contain their centres, tile the axis without gaps and carry no
units; and run averages state `cell_methods` (section 7.3) over a `time` with bounds.

Usage: python3 tests/python/read_like_a_user.py FILE
Exit status: 0 all checks pass, 1 a check failed, 2 wrong usage. Prints a JSON summary.
Needs: pip install xarray scipy
"""

import json
import sys

import numpy as np
import xarray as xr

USAGE = "usage: python3 tests/python/read_like_a_user.py FILE"
CELL_COORDINATES = ["altitude", "local_time", "latitude", "cell_latitude", "cell_longitude"]


def check(path):
    failures = []
    summary = {"file": path, "failures": failures}
    try:
        ds = xr.open_dataset(path, engine="scipy")
    except Exception as exc:  # any reason it cannot be opened is a failure to report
        failures.append(f"cannot open with default decoding: {exc}")
        summary["ok"] = False
        return summary
    with ds:
        needed = CELL_COORDINATES + ["window_end", "time", "time_bounds", "column", "density"]
        needed += ["source_flux", "reservoir", "cell_area"]
        missing = [name for name in needed if name not in ds.variables]
        if missing:
            failures.append(f"variables missing: {missing}")
            summary["ok"] = False
            return summary
        lt = ds["local_time"]
        summary["local_time_dtype"] = str(lt.dtype)
        if lt.dtype.kind != "f":
            failures.append(f"local_time decodes to {lt.dtype}, not a plain number")
        for name in ["window_end", "time"]:
            kind = ds[name].dtype.kind
            summary[f"{name}_dtype"] = str(ds[name].dtype)
            if kind != "M":
                failures.append(f"{name} decodes to {ds[name].dtype}, not datetime64")
        # Elapsed simulated time from the decoded dates: the reference date is t = 0.
        start = np.datetime64("2000-01-01T00:00:00")
        ends = (ds["window_end"].values - start) / np.timedelta64(1, "s")
        summary["window_end_s"] = [float(ends[0]), float(ends[-1])]
        if not (np.all(np.diff(ends) > 0) and ends[0] > 0):
            failures.append("window_end does not increase from after the start")
        try:
            value = float(ds.column.sel(latitude=5, local_time=10.5))
            summary["column_at_lat5_lt10.5"] = value
            if not (np.isfinite(value) and value >= 0):
                failures.append(f"column at latitude 5, local time 10.5 is {value}")
        except Exception as exc:
            failures.append(f"ds.column.sel(latitude=5, local_time=10.5) fails: {exc!r}")
        for name in CELL_COORDINATES + ["window_end"]:
            var = ds[name]
            bname = var.attrs.get("bounds") or var.encoding.get("bounds")
            if not bname or bname not in ds.variables:
                failures.append(f"{name} has no bounds variable")
                continue
            bounds = ds[bname]
            if "units" in bounds.attrs:
                failures.append(f"{bname} has units (CF 1.8 section 7.1: it takes {name}'s)")
            b = bounds.values
            c = var.values
            if b.shape != (c.size, 2):
                failures.append(f"{bname} has shape {b.shape}, expected ({c.size}, 2)")
                continue
            if not (np.all(b[:, 0] <= c) and np.all(c <= b[:, 1]) and np.all(b[:, 0] < b[:, 1])):
                failures.append(f"{name} values are not inside their {bname} cells")
            if not np.array_equal(b[1:, 0], b[:-1, 1]):
                failures.append(f"{bname} leaves gaps between cells")
            if name != "window_end" and not np.array_equal(c, (b[:, 0] + b[:, 1]) / 2):
                failures.append(f"{name} centres are not exactly the means of their bounds")
        summary["latitude"] = [float(x) for x in ds.latitude.values[:3]]
        if "time_bounds" not in ds.variables or ds["time_bounds"].shape != (2,):
            failures.append("the scalar time has no time_bounds(bound)")
        for name in ["density", "column", "source_flux"]:
            methods = ds[name].attrs.get("cell_methods", "")
            if "time: mean" not in methods:
                failures.append(f"{name} has cell_methods {methods!r}, without 'time: mean'")
        if ds["reservoir"].attrs.get("cell_measures") != "area: cell_area":
            failures.append("reservoir has no cell_measures = 'area: cell_area'")
        area = float(ds["cell_area"].sum())
        summary["cell_area_sum_m2"] = area
        if ds["cell_area"].attrs.get("units") != "m2" or not area > 0:
            failures.append("cell_area is not a positive area in m2")
    summary["ok"] = not failures
    return summary


def main(argv):
    if len(argv) != 2:
        print(USAGE, file=sys.stderr)
        return 2
    summary = check(argv[1])
    print(json.dumps(summary, indent=2))
    return 0 if not summary["failures"] else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv))

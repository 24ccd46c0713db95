#!/usr/bin/env python3
"""Checks a NetCDF file written by exobound-products from outside Rust.

Opens FILE with xarray's scipy backend (pure Python: no system netCDF library), then checks
that each named variable exists, has a non-empty `units` attribute, and holds no infinities
(NaN marks missing values and is allowed), that every coordinate variable has units, and that
the global `Conventions` attribute names CF. Prints a JSON summary on stdout.

Usage: python3 tests/python/check_netcdf.py FILE VAR [VAR...]
Exit status: 0 all checks pass, 1 a check failed, 2 wrong usage.
Needs: pip install xarray scipy
"""

import json
import sys

import numpy as np
import xarray as xr

USAGE = "usage: python3 tests/python/check_netcdf.py FILE VAR [VAR...]"


def describe(var):
    """Shape, units and value statistics of one xarray variable."""
    data = np.asarray(var.values, dtype=float)
    nan = np.isnan(data)
    finite = np.isfinite(data)
    return {
        "dims": list(var.dims),
        "shape": list(data.shape),
        "units": var.attrs.get("units"),
        "nan": int(nan.sum()),
        "infinite": int((~finite & ~nan).sum()),
        "min": float(data[finite].min()) if finite.any() else None,
        "max": float(data[finite].max()) if finite.any() else None,
    }


def has_units(var):
    units = var.attrs.get("units")
    return isinstance(units, str) and units.strip() != ""


def check(path, names):
    summary = {"file": path, "ok": False, "variables": {}, "coordinates": {}, "failures": []}
    failures = summary["failures"]
    try:
        ds = xr.open_dataset(path, engine="scipy", decode_times=False)
    except Exception as exc:  # any reason it cannot be opened is a failure to report
        failures.append(f"cannot open with xarray/scipy: {exc}")
        return summary
    with ds:
        conventions = ds.attrs.get("Conventions")
        summary["conventions"] = conventions
        if not (isinstance(conventions, str) and conventions.startswith("CF-")):
            failures.append(f"global attribute Conventions is {conventions!r}, not CF-x.y")
        for name in names:
            if name not in ds.variables:
                failures.append(f"variable {name!r} is missing")
                continue
            var = ds.variables[name]
            info = describe(var)
            summary["variables"][name] = info
            if not has_units(var):
                failures.append(f"variable {name!r} has no units attribute")
            if info["infinite"]:
                failures.append(f"variable {name!r} has {info['infinite']} infinite values")
        for name in ds.coords:
            var = ds.variables[name]
            summary["coordinates"][name] = var.attrs.get("units")
            if not has_units(var):
                failures.append(f"coordinate {name!r} has no units attribute")
    summary["ok"] = not failures
    return summary


def main(argv):
    if len(argv) < 3:
        print(USAGE, file=sys.stderr)
        return 2
    summary = check(argv[1], argv[2:])
    print(json.dumps(summary, indent=2))
    return 0 if summary["ok"] else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv))

#!/usr/bin/env python3
"""Checks CSV tables written by exobound the way a user reads them: with pandas, default settings.

For every FILE: no line starts with '#' (header + rows only); `pandas.read_csv(FILE)` reads it
with one column per header name; every column is float64 except the declared ones (text, bool
and integer columns below); atom-count columns (names ending `_atoms`) go through `np.log10`
with finite results where positive; `DataFrame.describe()` keeps every float column; every
float cell was written in exobound's one number style (docs/outputs.md: a decimal point or an
exponent, `NaN`, `inf`) and reads back to the same float in Python as pandas gives.
Prints a JSON summary on stdout.

Usage: python3 tests/python/check_csv.py FILE [FILE...]
Exit status: 0 all checks pass, 1 a check failed, 2 wrong usage.
Needs: pip install pandas
"""

import json
import math
import re
import sys

import numpy as np
import pandas as pd

USAGE = "usage: python3 tests/python/check_csv.py FILE [FILE...]"

# Columns that are not floats, by name, in the tables exobound writes (docs/outputs.md).
TEXT = {"measure", "unit", "variant", "significant", "observation", "stage"}
BOOL = {"spin_up"}
# Counts. A count averaged over replicas (merge-replicas: it then has an error column
# `<name>_error`) is a mean, hence a float.
INTEGER = {"step", "particles", "hops", "point"}

# One cell in the number style: shortest round-trip digits, a point or an exponent.
NUMBER = re.compile(r"^-?(\d+\.\d+|\d(\.\d+)?e-?\d+|NaN|inf)$")


def expected_kind(name, columns):
    """'text', 'bool', 'int' or 'float' for column `name` of a table with `columns`."""
    if name in TEXT:
        return "text"
    if name in BOOL:
        return "bool"
    if name in INTEGER and f"{name}_error" not in columns:
        return "int"
    return "float"


def check(path):
    """Problems found in one CSV file, and a short description of it."""
    problems = []
    with open(path, encoding="utf-8") as f:
        lines = f.read().split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    for k, line in enumerate(lines, start=1):
        if line.startswith("#"):
            problems.append(f"line {k} is a comment line: {line[:60]!r}")
        if line.strip() == "":
            problems.append(f"line {k} is empty")
    header = lines[0].split(",") if lines else []
    df = pd.read_csv(path)
    if list(df.columns) != header:
        problems.append(f"pandas read the columns {list(df.columns)}, the header has {header}")
    kinds = {}
    for name in df.columns:
        want = expected_kind(name, set(df.columns))
        kinds[name] = want
        dtype = df[name].dtype
        if want == "float" and dtype != np.float64:
            problems.append(f"column {name!r} reads as {dtype}, not float64")
        elif want == "int" and dtype != np.int64:
            problems.append(f"column {name!r} reads as {dtype}, not int64")
        elif want == "bool" and dtype != np.bool_:
            problems.append(f"column {name!r} reads as {dtype}, not bool")
    floats = [c for c in df.columns if kinds[c] == "float" and df[c].dtype == np.float64]
    # Every float cell in the one style, and the text reads back to the float pandas holds.
    for r, line in enumerate(lines[1:]):
        cells = line.split(",")
        for c, name in enumerate(header):
            if c >= len(cells) or kinds.get(name) != "float":
                continue
            cell = cells[c]
            if not NUMBER.match(cell):
                problems.append(f"line {r + 2}, column {name!r}: `{cell}` is not in the number style")
                continue
            x = float(cell)
            y = df[name].iloc[r]
            same = (math.isnan(x) and math.isnan(y)) or x == y
            if not same:
                problems.append(f"line {r + 2}, column {name!r}: `{cell}` reads as {y!r} in pandas")
    described = set(df.describe().columns) if floats else set()
    for name in floats:
        if name not in described:
            problems.append(f"describe() drops the float column {name!r}")
    logged = 0
    for name in floats:
        if not name.endswith("_atoms"):
            continue
        col = df[name].to_numpy()
        positive = col[np.isfinite(col) & (col > 0)]
        with np.errstate(divide="raise", invalid="raise"):
            logs = np.log10(positive)
        if not np.all(np.isfinite(logs)):
            problems.append(f"np.log10 of {name!r} is not finite")
        logged += 1
    return problems, {"rows": len(df), "float_columns": len(floats), "log10_columns": logged}


def main(argv):
    if len(argv) < 2:
        print(USAGE, file=sys.stderr)
        return 2
    report, failed = {}, False
    for path in argv[1:]:
        try:
            problems, info = check(path)
        except Exception as e:  # a file pandas cannot read at all is a failed check
            problems, info = [f"{type(e).__name__}: {e}"], {}
        info["problems"] = problems
        report[path] = info
        failed = failed or bool(problems)
    print(json.dumps(report, indent=1))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))

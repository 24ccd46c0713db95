#!/usr/bin/env python3
"""Figure-of-merit (FOM) bench for one exobound binary, and the comparison of two.

Why this exists: a speed-up of the engine only matters if it buys less Monte
Carlo noise per unit of computing, and a change that makes runs faster but
noisier (or slower but much quieter) is only judged fairly by noise x cost.
This script measures exactly that for one `exobound` binary on the bench
scenario (benches/fom/steady-sodium.toml): it runs K seeds, takes each run's
CPU time (user + system, from the kernel's rusage of that process), reads the
run products, and computes

    relvar(bin)   = var_over_seeds(x_bin) / mean_over_seeds(x_bin)^2
    median_relvar = median over the bins of relvar(bin)
    FOM           = 1 / (median_relvar x mean CPU seconds per seed run)

for two quantities:
  1. dayside near-surface density: the lowest altitude bin of `density`
     (exosphere.nc), averaged (by volume) over the latitude bins whose
     centre lies within 10 deg of the equator, one value per local-time bin
     whose centre lies in [6 h, 18 h); median over those bins;
  2. equatorial column: `column` (exosphere.nc) averaged (by area) over the
     same latitude bins, one value per local-time bin, all 24 local-time
     bins; median over those bins.

`compare` reads two result files and prints FOM_new / FOM_old for both.

Nothing here is decided by wall-clock time: the only timing is the CPU time
the kernel accounts to each run, which is what the bench measures. Wall
seconds are recorded for information only.

Usage (see benches/fom/README.md):
  measure.py run --exobound BIN [--scenario TOML] [--seeds K] --out DIR
                 [--label NAME] [--commit SHA] [--module-dir DIR] [--jobs J]
  measure.py compare OLD.json NEW.json [--out FILE]
"""

import argparse
import csv
import json
import math
import os
import platform
import shutil
import subprocess
import sys
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
DEFAULT_SCENARIO = os.path.join(HERE, "steady-sodium.toml")
EQUATOR_HALF_WIDTH_DEG = 10.0  # latitude bins whose centre lies within this of 0
DAYSIDE_LT_H = (6.0, 18.0)  # local-time bin centres in [6 h, 18 h)


# ---------------------------------------------------------------- reading


def read_fields(run_dir):
    """density (altitude, local_time, latitude) in cm-3, column (local_time,
    latitude) in cm-2 and the coordinates, from exosphere.nc."""
    path = os.path.join(run_dir, "exosphere.nc")
    try:
        import xarray as xr

        with xr.open_dataset(path, engine="scipy") as ds:
            out = {
                k: np.asarray(ds[k].values, dtype=float)
                for k in ("density", "column", "altitude_bounds", "local_time", "latitude")
            }
            units = {k: ds[k].attrs.get("units") for k in ("density", "column")}
            dims = {k: tuple(ds[k].dims) for k in ("density", "column")}
    except ImportError:
        from scipy.io import netcdf_file

        with netcdf_file(path, "r", mmap=False) as f:
            out = {
                k: np.array(f.variables[k].data, dtype=float)
                for k in ("density", "column", "altitude_bounds", "local_time", "latitude")
            }
            units = {k: f.variables[k].units.decode() for k in ("density", "column")}
            dims = {k: tuple(f.variables[k].dimensions) for k in ("density", "column")}
    # The layout documented in docs/outputs.md (same at 9f418a2 and later).
    assert dims["density"] == ("altitude", "local_time", "latitude"), dims
    assert dims["column"] == ("local_time", "latitude"), dims
    assert units == {"density": "cm-3", "column": "cm-2"}, units
    return out


def read_equator_csv(run_dir):
    """profiles/equator_local_time.csv: local time (h) and column (cm-2)."""
    path = os.path.join(run_dir, "profiles", "equator_local_time.csv")
    with open(path, newline="") as f:
        rows = list(csv.DictReader(f))
    return (
        np.array([float(r["local_time_h"]) for r in rows]),
        np.array([float(r["column_cm-2"]) for r in rows]),
    )


def read_windows(run_dir):
    path = os.path.join(run_dir, "windows.csv")
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


def equatorial_quantities(fields):
    """Per-bin values of the two quantities for one run."""
    lat = fields["latitude"]
    nlat = lat.size
    edges = np.linspace(-90.0, 90.0, nlat + 1)
    # Area of a latitude band on the sphere, and volume of an altitude shell
    # within it, are both proportional to sin(upper) - sin(lower).
    band_weight = np.sin(np.radians(edges[1:])) - np.sin(np.radians(edges[:-1]))
    eq = np.abs(lat) <= EQUATOR_HALF_WIDTH_DEG
    if not eq.any():  # no centre within the band: the one or two bins at 0
        d = np.abs(lat)
        eq = d == d.min()
    w = band_weight[eq] / band_weight[eq].sum()
    lt = fields["local_time"]
    day = (lt >= DAYSIDE_LT_H[0]) & (lt < DAYSIDE_LT_H[1])
    density_low = fields["density"][0]  # lowest altitude bin: (local_time, latitude)
    dens = (density_low[:, eq] * w).sum(axis=1)[day]
    col = (fields["column"][:, eq] * w).sum(axis=1)
    return {
        "density": dens,
        "density_local_time_h": lt[day],
        "column": col,
        "column_local_time_h": lt,
        "latitude_bins_used_deg": lat[eq].tolist(),
        "lowest_altitude_bin_km": fields["altitude_bounds"][0].tolist(),
    }


def drift_per_day(windows, key):
    """Least-squares slope of a window series after the spin-up, relative to
    its mean, per day of simulated time (a steadiness diagnostic)."""
    t, y = [], []
    for r in windows:
        if r["spin_up"].strip().lower() == "true":
            continue
        v = float(r[key])
        if math.isfinite(v):
            t.append(0.5 * (float(r["start_s"]) + float(r["end_s"])) / 86400.0)
            y.append(v)
    if len(t) < 3:
        return None
    t, y = np.array(t), np.array(y)
    slope = np.polyfit(t, y, 1)[0]
    return float(slope / y.mean())


# ---------------------------------------------------------------- statistics


def relvar_per_bin(values):
    """values: (K seeds, bins). Unbiased variance over seeds / mean^2."""
    mean = values.mean(axis=0)
    var = values.var(axis=0, ddof=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        rv = var / mean**2
    return rv, mean


def median_relvar(values):
    rv, _ = relvar_per_bin(values)
    rv = rv[np.isfinite(rv)]
    return float(np.median(rv)) if rv.size else float("nan")


def jackknife_fom_range(values, cpu):
    """A rough 68 % range of the FOM estimate from K seeds: the delete-one
    jackknife standard error of ln(FOM), applied as exp(+-se)."""
    k = values.shape[0]
    logs = []
    for i in range(k):
        keep = np.arange(k) != i
        m = median_relvar(values[keep])
        logs.append(-math.log(m * float(np.mean(cpu[keep]))))
    logs = np.array(logs)
    se = math.sqrt((k - 1) / k * float(np.sum((logs - logs.mean()) ** 2)))
    full = 1.0 / (median_relvar(values) * float(np.mean(cpu)))
    return se, [full * math.exp(-se), full * math.exp(se)]


# ---------------------------------------------------------------- running


def module_dir_for(binary):
    """The standard modules of a build: <target>/modules beside <target>/release."""
    cand = os.path.join(os.path.dirname(os.path.dirname(binary)), "modules")
    if os.path.isfile(os.path.join(cand, "photon-desorption.wasm")):
        return cand
    return None


def commit_for(binary):
    """(commit, how it was found) for a binary at <root>/target/release/exobound:
    the content of <root>/COMMIT (written when a commit is built cleanly from
    `git archive`), else the git HEAD of <root> at measurement time, which
    need not be what the binary was built from (a shared target directory
    may hold a build of uncommitted sources)."""
    root = os.path.dirname(os.path.dirname(os.path.dirname(binary)))
    path = os.path.join(root, "COMMIT")
    if os.path.isfile(path):
        return open(path).read().strip(), "COMMIT file beside the build"
    try:
        sha = subprocess.run(
            ["git", "-C", root, "rev-parse", "HEAD"],
            capture_output=True, text=True, check=True,
        ).stdout.strip()
        dirty = subprocess.run(
            ["git", "-C", root, "status", "--porcelain", "--untracked-files=no"],
            capture_output=True, text=True, check=True,
        ).stdout.strip()
        return (sha + ("-dirty" if dirty else ""),
                "git HEAD of the workspace at measurement time; the binary may have been built from other sources")
    except (subprocess.CalledProcessError, FileNotFoundError):
        return None, "unknown"


def sha256_of(path):
    import hashlib

    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def start_run(binary, scenario, seed, out_dir, env, extra=()):
    os.makedirs(os.path.dirname(out_dir), exist_ok=True)
    log = open(out_dir + ".log", "w")
    cmd = [binary, "run", scenario, "--seed", str(seed), "--out", out_dir, "--threads", "1"]
    cmd += list(extra)
    p = subprocess.Popen(cmd, stdout=log, stderr=subprocess.STDOUT, env=env)
    return p, log, cmd


def run_seeds(binary, scenario, seeds, runs_dir, env, jobs):
    """Runs every seed, at most `jobs` at once; returns {seed: record}.
    CPU seconds come from wait4's rusage of that very process (all its
    threads), so concurrent runs do not mix."""
    pending = list(seeds)
    running = {}  # pid -> (seed, popen, log, cmd, wall start)
    done = {}
    while pending or running:
        while pending and len(running) < jobs:
            seed = pending.pop(0)
            out = os.path.join(runs_dir, f"seed-{seed}")
            if os.path.exists(out):
                shutil.rmtree(out)
            p, log, cmd = start_run(binary, scenario, seed, out, env)
            running[p.pid] = (seed, p, log, cmd, time.monotonic())
            print(f"  started seed {seed} (pid {p.pid})", flush=True)
        pid, status, ru = os.wait4(-1, 0)
        if pid not in running:
            continue
        seed, p, log, cmd, t0 = running.pop(pid)
        wall = time.monotonic() - t0  # information only
        p.returncode = os.waitstatus_to_exitcode(status)
        log.close()
        cpu = ru.ru_utime + ru.ru_stime
        if p.returncode != 0:
            with open(log.name) as f:
                tail = f.read()[-3000:]
            sys.exit(f"seed {seed} failed (exit {p.returncode}): {' '.join(cmd)}\n{tail}")
        done[seed] = {
            "seed": seed,
            "cpu_seconds": cpu,
            "user_cpu_seconds": ru.ru_utime,
            "system_cpu_seconds": ru.ru_stime,
            "wall_seconds_informational": wall,
            "max_rss_kib": ru.ru_maxrss,
            "out": os.path.join(runs_dir, f"seed-{seed}"),
            "command": cmd,
        }
        print(f"  seed {seed}: {cpu:.2f} CPU s ({wall:.1f} s wall)", flush=True)
    return done


def cmd_run(a):
    binary = os.path.abspath(a.exobound)
    if not os.access(binary, os.X_OK):
        sys.exit(f"not an executable: {binary}")
    out = os.path.abspath(a.out)
    os.makedirs(out, exist_ok=True)
    # The run keeps exobound.lock next to its scenario file, pinning the module
    # digests of this engine; a private copy per output directory keeps the
    # engines' pins apart (and guards against modules rebuilt mid-measurement).
    scenario = os.path.join(out, "scenario.toml")
    shutil.copyfile(os.path.abspath(a.scenario), scenario)
    lock = os.path.join(out, "exobound.lock")
    if os.path.exists(lock):
        os.remove(lock)

    env = dict(os.environ)
    module_dir = os.path.abspath(a.module_dir) if a.module_dir else module_dir_for(binary)
    if module_dir:
        env["EXOBOUND_MODULE_DIR"] = module_dir
    else:
        env.pop("EXOBOUND_MODULE_DIR", None)  # the binary's own build directory
    # A private cache of compiled modules, filled by the warm-up run, so that
    # no timed run pays for compiling the modules and engines do not share one.
    env["EXOBOUND_CACHE_DIR"] = os.path.join(out, "module-cache")

    version = subprocess.run([binary, "--version"], capture_output=True, text=True).stdout.strip()
    if a.commit:
        commit, commit_source = a.commit, "given with --commit"
    else:
        commit, commit_source = commit_for(binary)
    print(f"{a.label}: {binary} ({version}, commit {commit}), modules {module_dir}", flush=True)

    # Warm-up: a 2-hour run of the same scenario, untimed for the result.
    warm_out = os.path.join(out, "warmup")
    if os.path.exists(warm_out):
        shutil.rmtree(warm_out)
    warm_extra = ["--set", 'run.duration="2 h"', "--set", 'run.spin_up="0 s"',
                  "--set", 'outputs.window="2 h"']
    p, log, cmd = start_run(binary, scenario, 1, warm_out, env, warm_extra)
    _, status, ru = os.wait4(p.pid, 0)
    p.returncode = os.waitstatus_to_exitcode(status)
    log.close()
    if p.returncode != 0:
        with open(log.name) as f:
            sys.exit(f"warm-up failed: {' '.join(cmd)}\n{f.read()[-3000:]}")
    warm_cpu = ru.ru_utime + ru.ru_stime
    print(f"  warm-up (fills the module cache, not counted): {warm_cpu:.2f} CPU s", flush=True)

    seeds = list(range(a.first_seed, a.first_seed + a.seeds))
    load_before = os.getloadavg()
    runs = run_seeds(binary, scenario, seeds, os.path.join(out, "runs"), env, a.jobs)
    load_after = os.getloadavg()

    dens, col, cpu, csv_check, drift_d, drift_c, hops = [], [], [], [], [], [], []
    meta = None
    for s in seeds:
        r = runs[s]
        f = read_fields(r["out"])
        q = equatorial_quantities(f)
        meta = q
        dens.append(q["density"])
        col.append(q["column"])
        cpu.append(r["cpu_seconds"])
        # Cross-check: the engine's own equatorial profile (equator_band
        # 10 deg by default) should be the same numbers as our column.
        lt_csv, col_csv = read_equator_csv(r["out"])
        if lt_csv.shape == q["column_local_time_h"].shape:
            csv_check.append(float(np.max(np.abs(col_csv / q["column"] - 1.0))))
        w = read_windows(r["out"])
        drift_d.append(drift_per_day(w, "dayside_near_surface_density_cm-3"))
        drift_c.append(drift_per_day(w, "subsolar_column_cm-2"))
        with open(os.path.join(r["out"], "summary.json")) as fh:
            summ = json.load(fh)
        h = summ.get("performance", {}).get("particle_hops")
        hops.append(h.get("value") if isinstance(h, dict) else h)
        r["particle_hops"] = hops[-1]
    dens, col, cpu = np.array(dens), np.array(col), np.array(cpu)

    mean_cpu = float(cpu.mean())
    result = {
        "what": "figure of merit FOM = 1 / (median over bins of relative variance across seeds x mean CPU seconds per seed run)",
        "label": a.label,
        "binary": binary,
        "binary_sha256": sha256_of(binary),
        "engine_version": version,
        "commit": commit,
        "commit_source": commit_source,
        "module_dir": module_dir,
        "scenario": os.path.abspath(a.scenario),
        "scenario_sha256": sha256_of(scenario),
        "seeds": seeds,
        "k_seeds": len(seeds),
        "threads_per_run": 1,
        "concurrent_runs": a.jobs,
        "host": platform.node(),
        "cpu_count": os.cpu_count(),
        "load_average_1_5_15_min_before_and_after": [list(load_before), list(load_after)],
        "warmup_cpu_seconds": warm_cpu,
        "runs": [runs[s] for s in seeds],
        "cpu_seconds_per_run": cpu.tolist(),
        "mean_cpu_seconds": mean_cpu,
        "std_cpu_seconds": float(cpu.std(ddof=1)) if len(cpu) > 1 else None,
        "quantities": {},
        "diagnostics": {
            "latitude_bins_used_deg": meta["latitude_bins_used_deg"],
            "lowest_altitude_bin_km": meta["lowest_altitude_bin_km"],
            "equator_csv_max_relative_difference": max(csv_check) if csv_check else None,
            "dayside_density_drift_per_day_relative": drift_d,
            "subsolar_column_drift_per_day_relative": drift_c,
            "note": "drifts are least-squares slopes of windows.csv series after the spin-up, divided by their mean, per day of simulated time",
        },
    }
    for name, vals, lt, unit, definition in (
        ("dayside_near_surface_density", dens, meta["density_local_time_h"], "cm-3",
         "density of the lowest altitude bin, volume-weighted over the latitude bins centred within "
         f"{EQUATOR_HALF_WIDTH_DEG:g} deg of the equator, per local-time bin centred in [6 h, 18 h)"),
        ("equatorial_column", col, meta["column_local_time_h"], "cm-2",
         "column, area-weighted over the latitude bins centred within "
         f"{EQUATOR_HALF_WIDTH_DEG:g} deg of the equator, per local-time bin (all)"),
    ):
        rv, mean = relvar_per_bin(vals)
        m = median_relvar(vals)
        se, rng68 = jackknife_fom_range(vals, cpu)
        result["quantities"][name] = {
            "definition": definition,
            "bins": int(vals.shape[1]),
            "local_time_h": lt.tolist(),
            f"mean_over_seeds_{unit}": mean.tolist(),
            "relvar_per_bin": rv.tolist(),
            "median_relvar": m,
            f"median_of_bin_means_{unit}": float(np.median(mean)),
            "fom_per_cpu_second": 1.0 / (m * mean_cpu),
            "fom_jackknife_se_of_ln": se,
            "fom_rough_68_percent_range_per_cpu_second": rng68,
        }
    path = os.path.join(out, "fom.json")
    with open(path, "w") as fh:
        json.dump(result, fh, indent=2)
    print_result(result)
    print(f"wrote {path}")


def print_result(r):
    print(f"\n{r['label']}: commit {r['commit']}, K = {r['k_seeds']} seeds, "
          f"{r['concurrent_runs']} runs at once, 1 thread each")
    print(f"  CPU seconds per run: {', '.join(f'{c:.2f}' for c in r['cpu_seconds_per_run'])}")
    print(f"  mean CPU seconds per run: {r['mean_cpu_seconds']:.2f}")
    for name, q in r["quantities"].items():
        lo, hi = q["fom_rough_68_percent_range_per_cpu_second"]
        unit = "cm-3" if "density" in name else "cm-2"
        print(f"  {name}: median relvar {q['median_relvar']:.3e} over {q['bins']} bins "
              f"(median bin mean {q[f'median_of_bin_means_{unit}']:.4g} {unit}); "
              f"FOM {q['fom_per_cpu_second']:.4g} per CPU s (jackknife 68 %: {lo:.4g}-{hi:.4g})")


def cmd_compare(a):
    with open(a.old) as f:
        old = json.load(f)
    with open(a.new) as f:
        new = json.load(f)
    print_result(old)
    print_result(new)
    out = {
        "old": {"label": old["label"], "commit": old["commit"], "binary": old["binary"]},
        "new": {"label": new["label"], "commit": new["commit"], "binary": new["binary"]},
        "cpu_seconds_ratio_new_over_old": new["mean_cpu_seconds"] / old["mean_cpu_seconds"],
        "quantities": {},
    }
    print(f"\nFOM_new / FOM_old ({new['label']} {new['commit']} over {old['label']} {old['commit']}):")
    print(f"  mean CPU seconds per run, new / old: {out['cpu_seconds_ratio_new_over_old']:.3f}")
    for name in old["quantities"]:
        qo, qn = old["quantities"][name], new["quantities"][name]
        ratio = qn["fom_per_cpu_second"] / qo["fom_per_cpu_second"]
        # Rough spread: the two jackknife errors of ln(FOM) in quadrature.
        s = math.hypot(qo["fom_jackknife_se_of_ln"], qn["fom_jackknife_se_of_ln"])
        out["quantities"][name] = {
            "fom_ratio_new_over_old": ratio,
            "fom_ratio_rough_68_percent_range": [ratio * math.exp(-s), ratio * math.exp(s)],
            "median_relvar_ratio_new_over_old": qn["median_relvar"] / qo["median_relvar"],
        }
        print(f"  {name}: FOM ratio {ratio:.3f} (rough 68 % range {ratio * math.exp(-s):.2f}-"
              f"{ratio * math.exp(s):.2f}); median relvar new / old "
              f"{qn['median_relvar'] / qo['median_relvar']:.3f}")
    if a.out:
        with open(a.out, "w") as f:
            json.dump(out, f, indent=2)
        print(f"wrote {a.out}")


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    sub = ap.add_subparsers(dest="cmd", required=True)
    r = sub.add_parser("run", help="measure one binary")
    r.add_argument("--exobound", required=True, help="path of the exobound binary")
    r.add_argument("--scenario", default=DEFAULT_SCENARIO)
    r.add_argument("--seeds", type=int, default=8, help="K, number of seeds (>= 6)")
    r.add_argument("--first-seed", type=int, default=1)
    r.add_argument("--out", required=True, help="output directory (runs, fom.json)")
    r.add_argument("--label", default="engine")
    r.add_argument("--commit", default=None, help="commit to record (default: from the binary's workspace)")
    r.add_argument("--module-dir", default=None,
                   help="standard modules (default: <target>/modules beside the binary's <target>/release)")
    r.add_argument("--jobs", type=int, default=2, help="seed runs at once (each on 1 thread)")
    c = sub.add_parser("compare", help="FOM_new / FOM_old from two fom.json files")
    c.add_argument("old")
    c.add_argument("new")
    c.add_argument("--out", default=None, help="write the ratios as JSON here")
    a = ap.parse_args()
    if a.cmd == "run":
        if a.seeds < 6:
            sys.exit("K must be at least 6")
        cmd_run(a)
    else:
        cmd_compare(a)


if __name__ == "__main__":
    main()

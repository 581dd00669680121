#!/usr/bin/env python
"""Peak memory and time of `sembridge reconcile` on 1,000,000 rows.

Simulates linear growth (200,000 persons x 5 waves at exact wave times, no missing occasions, fixed
seed), writes it as a CSV file with a YAML description into a temporary folder, and runs the real
command line (`python -m bridge.cli reconcile SPEC --json result.json --quiet`) in a child process.
It records the wall time of that process and its peak resident memory (`ru_maxrss` of the finished
child, from `resource.getrusage(RUSAGE_CHILDREN)`), the exit code and the verdict.

This is a benchmark, not a test: it asserts nothing, and pytest does not collect it.

    python benchmarks/bench_million.py
    python benchmarks/bench_million.py --persons 20000 --out million.json   # a quicker, smaller run
    python benchmarks/bench_million.py --shaping-only                       # reading and shaping alone
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
import yaml

SEED = 20_261_202
WAVES = (0.0, 1.0, 2.0, 3.0, 4.0)


def simulate(n_persons: int) -> pd.DataFrame:
    """Linear growth: intercept 50, slope 2, person-effect covariance [[25, 1.5], [1.5, 1]], residual 4."""
    rng = np.random.default_rng(SEED)
    effects = rng.multivariate_normal([50.0, 2.0], [[25.0, 1.5], [1.5, 1.0]], size=n_persons)
    times = np.tile(np.asarray(WAVES), n_persons)
    person = np.repeat(np.arange(n_persons), len(WAVES))
    outcome = effects[person, 0] + effects[person, 1] * times + rng.normal(0.0, 2.0, size=times.size)
    return pd.DataFrame({"student": [f"s{i:06d}" for i in person], "months": times, "score": outcome.round(4)})


def write_case(folder: Path, n_persons: int) -> Path:
    simulate(n_persons).to_csv(folder / "million.csv", index=False)
    description = {"data": {"path": "million.csv", "layout": "long", "person": "student", "time": "months",
                            "outcome": "score"},
                   "model": {"kind": "growth", "shape": "linear", "random": ["intercept", "slope"]},
                   "estimation": {"method": "ml"}}
    spec = folder / "million.yaml"
    spec.write_text(yaml.safe_dump(description, sort_keys=False), encoding="utf-8")
    return spec


def run(spec: Path) -> dict:
    """Run the command line once; wall time, peak memory of the child, exit code, verdict."""
    result = spec.parent / "result.json"
    env = {**os.environ, "OPENBLAS_NUM_THREADS": "1", "PYTHONPATH": str(Path(__file__).resolve().parents[1])}
    began = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "bridge.cli", "reconcile", str(spec), "--json", str(result),
                           "--quiet"], capture_output=True, text=True, env=env)
    seconds = time.perf_counter() - began
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    verdict = json.loads(result.read_text())["verdict"] if result.exists() else None
    return {"seconds": round(seconds, 1), "cpu_seconds": round(usage.ru_utime + usage.ru_stime, 1),
            "peak_memory_mib": round(usage.ru_maxrss / 1024, 1), "load_average_after": os.getloadavg(),
            "exit_code": done.returncode, "verdict": verdict, "stderr": done.stderr[-500:]}


def shaping_only(spec: Path) -> dict:
    """Reading the description and shaping the data alone, in a fresh child (peak memory and time)."""
    code = ("import resource, sys, time\nfrom bridge.spec import load\nfrom bridge.data import shape_data\n"
            "began = time.perf_counter()\nshaped = shape_data(load(sys.argv[1]))\n"
            "print(time.perf_counter() - began, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, "
            "shaped.n_persons)")
    env = {**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[1])}
    done = subprocess.run([sys.executable, "-c", code, str(spec)], capture_output=True, text=True, env=env)
    seconds, peak, persons = done.stdout.split()
    return {"shaping_seconds": round(float(seconds), 1), "shaping_peak_memory_mib": round(float(peak), 1),
            "shaped_persons": int(persons)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--persons", type=int, default=200_000, help="persons (rows = 5 x persons)")
    parser.add_argument("--out", type=Path, help="also write the figures as JSON to this file")
    parser.add_argument("--shaping-only", action="store_true", help="time only reading and shaping the data")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        spec = write_case(Path(tmp), args.persons)
        size = (Path(tmp) / "million.csv").stat().st_size
        measured = shaping_only(spec) if args.shaping_only else run(spec)
        figures = {"persons": args.persons, "rows": args.persons * len(WAVES), "csv_bytes": size, **measured,
                   "python": platform.python_version(), "machine": platform.machine(), "cores": os.cpu_count()}
    print(json.dumps(figures, indent=2))
    if args.out:
        args.out.write_text(json.dumps(figures, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()

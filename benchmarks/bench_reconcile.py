#!/usr/bin/env python
"""Where does the time of one reconciliation go?

For each sample size this script simulates linear growth (6 waves, 15% of the
occasions missing, fixed seed), writes it as a CSV plus a YAML description in a
temporary folder, and then runs the pipeline stage by stage, timing every stage
with ``time.perf_counter()``:

* other    - reading the description, reading and shaping the data, compiling
             both forms, and building the reconciliation;
* sem      - ``bridge.fit.fit_sem`` (semopy, including the refits the adapter
             makes from its own last point);
* mixed    - ``bridge.fit.fit_mixed`` (statsmodels MixedLM, including its refits);
* referee  - ``adjudicate``: the likelihood checks and the standard errors from
             the numerical Hessian; any library refit the referee orders is
             timed on its own and reported in the ``refits`` column;
* baseline - ONE plain ``MixedLM(endog, exog, groups, exog_re).fit(reml=False)``
             on the same arrays, as a yardstick.

Every ratio in the table comes from a single run of the pipeline, so the figures
in one row were measured moments apart on the same machine. With ``--repeat N``
the run whose total is the median is shown; every run is kept in the JSON file.

This is a benchmark, not a test: it asserts nothing.

    python benchmarks/bench_reconcile.py
    python benchmarks/bench_reconcile.py --sizes 1000 5000 --repeat 3 --out timings.json
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import sys
import tempfile
import time
import warnings
from contextlib import contextmanager
from importlib import metadata
from pathlib import Path

import numpy as np
import yaml
from statsmodels.regression.mixed_linear_model import MixedLM

import bridge
import bridge.referee.adjudicate as adjudicate_module
from bridge.compile import Plan, compile_pair
from bridge.fit import fit_mixed, fit_sem
from bridge.reconcile.build import reconcile
from bridge.reconcile.compare import compare_adjudicated
from bridge.reconcile.evaluation import Evaluation
from bridge.referee.adjudicate import adjudicate
from bridge.simulate.growth import GrowthTruth, simulate_growth

SEED = 20_240_611
WAVES = (0.0, 1.0, 2.0, 3.0, 4.0, 5.0)
MISSING_RATE = 0.15
LIBRARIES = ("semopy", "statsmodels", "numpy", "scipy", "pandas", "PyYAML")


def truth(n_persons: int) -> GrowthTruth:
    """Linear growth with a random intercept and slope, one residual variance, 15% missing occasions."""
    return GrowthTruth(n_persons=n_persons, waves=WAVES, mean={"intercept": 50.0, "slope": 2.0},
                       random_cov=((25.0, 1.5), (1.5, 1.0)), residual=4.0, missing_rate=MISSING_RATE)


def write_case(folder: Path, n_persons: int) -> Path:
    """Simulate the data and write CSV + YAML description (the same layout as tests/conftest.py)."""
    frame = simulate_growth(truth(n_persons), SEED)
    data = folder / f"growth_{n_persons}.csv"
    frame.to_csv(data, index=False)
    description = {"data": {"path": data.name, "person": "person", "time": "time", "outcome": "outcome"},
                   "model": {"shape": "linear", "random": ["intercept", "slope"]},
                   "estimation": {"method": "ml"}}
    spec = folder / f"growth_{n_persons}.yaml"
    spec.write_text(yaml.safe_dump(description, sort_keys=False), encoding="utf-8")
    return spec


class _Stopwatch:
    """Accumulates the time spent inside the wrapped callables, by label."""

    def __init__(self):
        self.seconds: dict[str, float] = {}
        self.calls: dict[str, int] = {}

    def wrap(self, label: str, function):
        def timed(*args, **kwargs):
            began = time.perf_counter()
            try:
                return function(*args, **kwargs)
            finally:
                self.seconds[label] = self.seconds.get(label, 0.0) + time.perf_counter() - began
                self.calls[label] = self.calls.get(label, 0) + 1
        return timed


@contextmanager
def _watch_referee(watch: _Stopwatch):
    """Time the library refits the referee orders, and its standard errors, without touching bridge/.

    adjudicate() looks these names up in its own module at call time, so wrapping
    the module attributes for the duration of the call is enough.
    """
    names = {"fit_mixed": "refit", "fit_sem": "refit", "standard_errors": "standard_errors"}
    saved = {name: getattr(adjudicate_module, name) for name in names}
    try:
        for name, label in names.items():
            setattr(adjudicate_module, name, watch.wrap(label, saved[name]))
        yield
    finally:
        for name, original in saved.items():
            setattr(adjudicate_module, name, original)


def run_once(spec: Path) -> dict:
    """One pass through the pipeline, stage by stage, plus one plain MixedLM fit of the same arrays."""
    t: dict[str, float] = {}

    began = time.perf_counter()
    description = bridge.load(spec)
    t["load"] = time.perf_counter() - began

    began = time.perf_counter()
    shaped = bridge.shape_data(description)
    t["shape"] = time.perf_counter() - began

    began = time.perf_counter()
    plan = Plan.from_description(description)
    pair = compile_pair(shaped, plan)
    t["compile"] = time.perf_counter() - began

    began = time.perf_counter()
    sem = fit_sem(pair.sem)
    t["sem"] = time.perf_counter() - began

    began = time.perf_counter()
    mixed = fit_mixed(pair.mixed, plan.reml)
    t["mixed"] = time.perf_counter() - began

    watch = _Stopwatch()
    began = time.perf_counter()
    with _watch_referee(watch):
        adjudication = adjudicate(pair, sem, mixed)
    adjudicate_seconds = time.perf_counter() - began
    t["referee_refits"] = watch.seconds.get("refit", 0.0)
    t["referee"] = adjudicate_seconds - t["referee_refits"]
    t["referee_standard_errors"] = watch.seconds.get("standard_errors", 0.0)

    began = time.perf_counter()
    base = Evaluation(plan=plan, pair=pair, adjudication=adjudication, rows=compare_adjudicated(pair, adjudication))
    result = reconcile(shaped, base)
    t["reconcile"] = time.perf_counter() - began

    # the yardstick: exactly one plain MixedLM fit on the arrays the tool handed to statsmodels
    arrays = pair.mixed.mixed
    began = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain = MixedLM(arrays.endog, arrays.exog, arrays.groups, arrays.exog_re).fit(reml=False)
    t["plain_mixedlm"] = time.perf_counter() - began

    t["other"] = t["load"] + t["shape"] + t["compile"] + t["reconcile"]
    t["total"] = t["other"] + t["sem"] + t["mixed"] + t["referee"] + t["referee_refits"]
    overhead = t["other"] + t["referee"]          # everything except the library fits
    return {
        "seconds": t,
        "share": {"sem": t["sem"] / t["total"], "mixed": t["mixed"] / t["total"],
                  "referee": t["referee"] / t["total"],
                  "referee_with_refits": (t["referee"] + t["referee_refits"]) / t["total"],
                  "referee_refits": t["referee_refits"] / t["total"], "other": t["other"] / t["total"],
                  "overhead": overhead / t["total"]},
        "total_over_plain_mixedlm": t["total"] / t["plain_mixedlm"],
        "persons": shaped.n_persons, "occasions": int(len(shaped.outcome)),
        "fits": {"semopy": sem.fits, "statsmodels": mixed.fits,
                 "referee_refits": watch.calls.get("refit", 0),
                 "kept_refits": [f"{r.library}: {r.reason}" for r in adjudication.refits if r.kept]},
        "verdict": str(result.verdict.value if hasattr(result.verdict, "value") else result.verdict),
        "log_likelihood": {"semopy": sem.own_log_likelihood, "statsmodels": mixed.own_log_likelihood,
                           # put on the user's scale like the adapters do, so the three are comparable
                           "plain_mixedlm": float(plain.llf) + pair.mixed.scaling.log_jacobian(len(arrays.endog))},
    }


def machine() -> dict:
    versions = {}
    for name in LIBRARIES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    return {"cpus": os.cpu_count(), "python": platform.python_version(), "platform": platform.platform(),
            "processor": platform.processor() or platform.machine(), "sembridge": bridge.__version__,
            "libraries": versions,
            "thread_env": {k: os.environ[k] for k in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
                           if k in os.environ}}


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%" if x >= 0.001 else f"{100 * x:.2f}%"


def table(rows: list[dict]) -> str:
    head = ("| persons | occasions | SEM fit s (fits) | mixed fit s (fits) | referee s | referee refits s (n) "
            "| other s | total s | SEM | mixed | referee | other | overhead | total / plain MixedLM (plain s) |")
    lines = [head, "|" + "|".join(["---:"] * 14) + "|"]
    for r in rows:
        s, p, f = r["seconds"], r["share"], r["fits"]
        lines.append(
            f"| {r['persons']:,} | {r['occasions']:,} | {s['sem']:.2f} ({f['semopy']}) | {s['mixed']:.2f} "
            f"({f['statsmodels']}) | {s['referee']:.3f} | {s['referee_refits']:.2f} ({f['referee_refits']}) "
            f"| {s['other']:.3f} | {s['total']:.2f} | {_pct(p['sem'])} | {_pct(p['mixed'])} "
            f"| {_pct(p['referee'])} | {_pct(p['other'])} | {_pct(p['overhead'])} "
            f"| {r['total_over_plain_mixedlm']:.1f}x ({s['plain_mixedlm']:.2f}) |")
    return "\n".join(lines)


def detail(rows: list[dict]) -> str:
    head = "| persons | load s | shape s | compile s | reconcile s | referee: standard errors s | referee: checks and rest s |"
    lines = [head, "|" + "|".join(["---:"] * 7) + "|"]
    for r in rows:
        s = r["seconds"]
        lines.append(f"| {r['persons']:,} | {s['load']:.4f} | {s['shape']:.3f} | {s['compile']:.3f} "
                     f"| {s['reconcile']:.4f} | {s['referee_standard_errors']:.3f} "
                     f"| {s['referee'] - s['referee_standard_errors']:.3f} |")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1000, 5000, 20000], help="numbers of persons")
    parser.add_argument("--repeat", type=int, default=1, help="runs per size; the median-total run is shown")
    parser.add_argument("--out", type=Path, default=None, help="write every run as JSON to this file")
    args = parser.parse_args(argv)

    shown, everything = [], []
    with tempfile.TemporaryDirectory(prefix="sembridge-bench-") as tmp:
        for n in args.sizes:
            spec = write_case(Path(tmp), n)
            runs = []
            for i in range(max(1, args.repeat)):
                run = run_once(spec)
                runs.append(run)
                print(f"[{n} persons, run {i + 1}] total {run['seconds']['total']:.2f} s, "
                      f"verdict {run['verdict']}", file=sys.stderr, flush=True)
            runs_sorted = sorted(runs, key=lambda r: r["seconds"]["total"])
            shown.append(runs_sorted[(len(runs_sorted) - 1) // 2])
            everything.append({"persons": n, "runs": runs})

    print(table(shown))
    print()
    print(detail(shown))
    print()
    print("Shares are of the total. overhead = other + referee (everything except the library fits; the "
          "referee's library refits, if any, count as library fits). Figures in a row come from one run.")
    if args.out:
        payload = {"machine": machine(), "seed": SEED, "waves": WAVES, "missing_rate": MISSING_RATE,
                   "repeat": args.repeat, "shown": shown, "sizes": everything}
        args.out.write_text(json.dumps(payload, indent=2, default=float), encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())

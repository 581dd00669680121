#!/usr/bin/env python
"""How long the absolute-fit stage takes (the saturated model by EM, the baseline, both forms' indices).

Part 1 times `bridge.referee.absolute_fit.growth_absolute_fit` after a full evaluation of the scenario of
`bench_reconcile.py` (linear growth, 6 waves, 15% of the occasions missing at random, its fixed seed), next
to the time of the evaluation itself (both fits and the referee). Part 2 times the saturated model alone on
multivariate normal data with many missing patterns (seed 1), the EM's hardest case: every occasion missing
independently, so nearly every person has a pattern of their own.

This is a benchmark, not a test: it asserts nothing.

    python benchmarks/bench_absolute_fit.py
"""
from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np
import yaml

from bridge.compile import Plan
from bridge.data import shape_data
from bridge.reconcile.evaluation import evaluate
from bridge.referee.absolute_fit import growth_absolute_fit
from bridge.referee.saturated import saturated
from bridge.simulate.growth import GrowthTruth, simulate_growth
from bridge.spec import load

SEED = 20_240_611   # as in bench_reconcile.py
WAVES = (0.0, 1.0, 2.0, 3.0, 4.0, 5.0)


def _pipeline(persons: int) -> tuple[float, float]:
    truth = GrowthTruth(n_persons=persons, waves=WAVES, mean={"intercept": 50.0, "slope": 2.0},
                        random_cov=((25.0, 1.5), (1.5, 1.0)), residual=4.0, missing_rate=0.15)
    with tempfile.TemporaryDirectory() as folder:
        simulate_growth(truth, SEED).to_csv(Path(folder) / "growth.csv", index=False)
        spec = Path(folder) / "growth.yaml"
        spec.write_text(yaml.safe_dump({"data": {"path": "growth.csv", "layout": "long", "person": "person",
                                                 "time": "time", "outcome": "outcome"},
                                        "model": {"kind": "growth", "shape": "linear"},
                                        "estimation": {"method": "ml"}}), encoding="utf-8")
        shaped = shape_data(load(spec))
        start = time.perf_counter()
        base = evaluate(shaped, Plan.from_description(shaped.description))
        middle = time.perf_counter()
        adj = base.adjudication
        growth_absolute_fit(base.pair, adj.sem.params, adj.mixed.params, (True, True))
        return middle - start, time.perf_counter() - middle


def _em(persons: int, waves: int, missing: float) -> tuple[int, int, float]:
    rng = np.random.default_rng(1)
    root = rng.normal(size=(waves, 3 * waves))
    Y = rng.multivariate_normal(np.arange(waves, dtype=float), root @ root.T / waves + np.eye(waves), size=persons)
    Y[rng.random(Y.shape) < missing] = np.nan
    patterns = len(np.unique(np.isfinite(Y), axis=0))
    start = time.perf_counter()
    best = saturated(Y, np.ones((persons, 1)))
    return patterns, best.steps, time.perf_counter() - start


def main() -> None:
    print("| persons | evaluation (both fits, referee) s | absolute fit s | share |")
    print("|---:|---:|---:|---:|")
    for persons in (1000, 5000):
        fits, absolute = _pipeline(persons)
        print(f"| {persons} | {fits:.2f} | {absolute:.3f} | {absolute / fits:.1%} |")
    print()
    print("| persons | waves | missing | patterns | EM steps | seconds |")
    print("|---:|---:|---:|---:|---:|---:|")
    for persons, waves, missing in ((1000, 6, 0.15), (5000, 6, 0.15), (5000, 12, 0.3)):
        patterns, steps, seconds = _em(persons, waves, missing)
        print(f"| {persons} | {waves} | {missing:.0%} | {patterns} | {steps} | {seconds:.2f} |")


if __name__ == "__main__":
    main()

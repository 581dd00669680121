"""Coverage check of both forms on a balanced design (the figures in docs/timing-lab.md).

Balanced linear growth: N persons at waves 0..4, no missing occasions, no time jitter,
intercept mean 50, slope mean 2, person-effect covariance [[25, 1.5], [1.5, 1]], residual
variance 4. Each replication fits both forms and reconciles them; the 95% Wald interval of
every quantity is checked against the truth. The check passes when the coverage of the mean
slope lies in [0.91, 0.98] in both frameworks.

    python benchmarks/coverage_run.py                      # N = 300, 200 replications, 2 workers
    python benchmarks/coverage_run.py --persons 100 --replications 40 --out coverage-small

Exit code 0 when the check passes, 1 when it does not. Not collected by pytest; the test
`tests/test_timing_lab.py::test_full_coverage_run` (marker `heavy`) runs the same study.
"""
from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import yaml

from bridge.render import simulation as render
from bridge.spec import load
from bridge.timing.montecarlo import run_replications
from bridge.timing.population import load_population
from bridge.timing.summary import replications_frame, summarise, summary_frame

BAND = (0.91, 0.98)
DESCRIPTION = {"data": {"path": "simulated.csv", "layout": "long", "person": "person", "time": "time",
                        "outcome": "outcome"},
               "model": {"shape": "linear", "random": ["intercept", "slope"]},
               "estimation": {"method": "ml", "waves": [0, 1, 2, 3, 4]}}
TRUTH = {"mean.intercept": 50.0, "mean.slope": 2.0, "var.intercept": 25.0, "var.slope": 1.0,
         "cov.intercept.slope": 1.5, "var.residual": 4.0}


def write_inputs(folder: Path, persons: int) -> tuple[Path, Path]:
    """The description and population files of the study."""
    spec, population = folder / "balanced.yaml", folder / "balanced-population.yaml"
    spec.write_text(yaml.safe_dump(DESCRIPTION, sort_keys=False), encoding="utf-8")
    design = {"persons": persons, "waves": [0, 1, 2, 3, 4], "missing_rate": 0.0, "jitter": 0.0}
    population.write_text(yaml.safe_dump({"design": design, "truth": TRUTH}, sort_keys=False), encoding="utf-8")
    return spec, population


def coverage_study(persons: int = 300, replications: int = 200, seed: int = 20261202, workers: int = 2):
    """Run the study; return (summary, replications)."""
    with tempfile.TemporaryDirectory() as folder:
        spec, population_file = write_inputs(Path(folder), persons)
        desc = load(spec)
        population = load_population(population_file, desc)
        reps = run_replications(desc, population, replications, seed=seed, workers=workers)
    return summarise(reps, spec.name, population_file.name, seed), reps


def passes(summary) -> bool:
    """Coverage of the mean slope inside BAND for both frameworks."""
    return all(BAND[0] <= summary.row("mean.slope", f).coverage <= BAND[1] for f in ("sem", "mixed"))


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--persons", type=int, default=300)
    parser.add_argument("--replications", type=int, default=200)
    parser.add_argument("--seed", type=int, default=20261202)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--out", type=Path, default=None, help="folder for the raw results and the summary")
    args = parser.parse_args()
    began = time.perf_counter()
    summary, reps = coverage_study(args.persons, args.replications, args.seed, args.workers)
    print(render.markdown_table(summary))
    print(f"\nwall time {time.perf_counter() - began:.0f} s; mean slope coverage: "
          + ", ".join(f"{f} {summary.row('mean.slope', f).coverage:.3f}" for f in ("sem", "mixed"))
          + f"; required band [{BAND[0]}, {BAND[1]}]")
    if args.out is not None:
        args.out.mkdir(parents=True, exist_ok=True)
        replications_frame(reps).to_parquet(args.out / "replications.parquet", index=False)
        (args.out / "summary.md").write_text(render.markdown_table(summary) + "\n", encoding="utf-8")
        summary_frame(summary).to_csv(args.out / "summary.csv", index=False)
        render.figure(summary, args.out / "summary.png")
    return 0 if passes(summary) else 1


if __name__ == "__main__":
    sys.exit(main())

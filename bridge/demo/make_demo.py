"""Regenerate the bundled sight-reading demo (CSV data and YAML description).

The scenario is invented: a music school follows its students' sight-reading
scores at five juried assessments over their first two years. Each student
meets the jury near 0, 6, 12, 18 and 24 months after enrolment, but the exact
date varies by student (up to about 1.5 months either way; the first jury is
the entrance placement, which may fall shortly before enrolment). Some
assessments are missed at random. Students take either group or private
lessons; private students improve a little faster.

Run ``python -m bridge.demo.make_demo [output_dir]``; without an argument the
files next to this module are rewritten. Output is byte-for-byte reproducible.
"""
from __future__ import annotations

import sys
from pathlib import Path

from bridge.simulate import GrowthTruth, simulate_growth

SEED = 20240917
CSV_NAME = "sight_reading.csv"
YAML_NAME = "sight_reading.yaml"

#: Population values behind the demo data (months since enrolment as time).
TRUTH = GrowthTruth(
    n_persons=240,
    waves=(0.0, 6.0, 12.0, 18.0, 24.0),
    mean={"intercept": 49.0, "slope": 0.9},
    random_cov=((25.0, -0.2), (-0.2, 0.04)),
    random_terms=("intercept", "slope"),
    residual=9.0,
    effects={"format": {"intercept": 1.0, "slope": 0.3}},
    predictors={"format": "binary:group,private"},
    jitter=1.5,
    missing_rate=0.08,
)

DESCRIPTION = """\
# Sight-reading growth at a music school (invented demo data).
# About 240 students meet a jury five times over two years; each jury date
# varies by student, so 'months' is the actual time since enrolment.
# Lesson format (group or private) may shift both the starting level and the
# monthly gain; group lessons are the reference.
data:
  path: sight_reading.csv
  layout: long
  person: student
  time: months
  outcome: score
model:
  kind: growth
  shape: linear            # straight-line progress over the two years
  random: [intercept, slope]   # students differ in start and in pace
  predictors: [format]
  residuals: equal
  time_origin: 0           # intercept = level at enrolment
  reference_levels: {format: group}
estimation:
  method: ml
  missing: full-information   # missed juries are simply absent rows
  waves: [0, 6, 12, 18, 24]   # planned jury months
"""


def build_frame():
    """Simulate the demo students and shape the columns as shipped."""
    frame = simulate_growth(TRUTH, seed=SEED)
    frame = frame.rename(columns={"person": "student", "time": "months", "outcome": "score"})
    frame["months"] = frame["months"].round(2)
    frame["score"] = frame["score"].round(1)
    return frame[["student", "months", "score", "format"]]


def main(output_dir: str | Path | None = None) -> tuple[Path, Path]:
    """Write the demo CSV and YAML into ``output_dir`` (default: this package).

    Returns:
        The paths of the CSV file and the YAML description written.
    """
    target = Path(output_dir) if output_dir is not None else Path(__file__).resolve().parent
    target.mkdir(parents=True, exist_ok=True)
    csv_path, yaml_path = target / CSV_NAME, target / YAML_NAME
    text = build_frame().to_csv(index=False, lineterminator="\n")
    csv_path.write_bytes(text.encode("utf-8"))
    yaml_path.write_bytes(DESCRIPTION.encode("utf-8"))
    return csv_path, yaml_path


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else None)

"""Regenerate the bundled cross-lagged demo: weekly practice minutes and playing confidence.

The scenario is invented: the same music school asks its students, every week for six weeks, how many
minutes they practised and how confident they feel playing (0 to 10). Practice may build confidence
the next week, and confidence may lead to more practice. A few weekly reports are missing.

Run ``python -m bridge.demo.make_weekly [output_dir]``; output is byte-for-byte reproducible.
"""
from __future__ import annotations

import sys
from pathlib import Path

from bridge.simulate.panel import PanelTruth, simulate_panel

SEED = 20241103
CSV_NAME = "weekly_practice.csv"
YAML_NAME = "weekly_practice.yaml"

#: Population values on a standardised scale; practice = 120 + 30 x, confidence = 6 + 1.5 y.
TRUTH = PanelTruth(n_persons=220, n_waves=6, paths=((0.55, 0.15), (0.20, 0.50)), kind="clpm",
                   residual_cov=((0.6, 0.15), (0.15, 0.6)), first_cov=((1.0, 0.3), (0.3, 1.0)),
                   missing_rate=0.04, names=("practice", "confidence"))

DESCRIPTION = """\
# Weekly practice and playing confidence at a music school (invented demo data).
# Students report each week, for six weeks, their practice minutes and how confident they
# feel playing (0-10). Does practice this week predict confidence next week, and the reverse?
data:
  path: weekly_practice.csv
  layout: long
  person: student
  time: week
  outcomes: [practice, confidence]
model:
  kind: cross-lagged
  variant: clpm              # each outcome regressed on both outcomes of the week before
  paths: time-invariant      # the same effects every week
estimation:
  method: ml
  missing: full-information  # missed weekly reports are empty cells
"""


def build_frame():
    frame = simulate_panel(TRUTH, seed=SEED).rename(columns={"person": "student", "wave": "week"})
    frame["practice"] = (120 + 30 * frame["practice"]).round(0)
    frame["confidence"] = (6 + 1.5 * frame["confidence"]).round(2)
    frame["student"] = frame["student"].str.replace("p", "s", regex=False)
    frame["week"] = frame["week"].astype(int)
    return frame[["student", "week", "practice", "confidence"]]


def main(output_dir: str | Path | None = None) -> tuple[Path, Path]:
    """Write the demo CSV and YAML into ``output_dir`` (default: this package)."""
    target = Path(output_dir) if output_dir is not None else Path(__file__).resolve().parent
    target.mkdir(parents=True, exist_ok=True)
    csv_path, yaml_path = target / CSV_NAME, target / YAML_NAME
    csv_path.write_bytes(build_frame().to_csv(index=False, lineterminator="\n").encode("utf-8"))
    yaml_path.write_bytes(DESCRIPTION.encode("utf-8"))
    return csv_path, yaml_path


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else None)

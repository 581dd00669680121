"""Summaries of a Monte Carlo study: bias, RMSE, coverage and convergence per quantity and framework.

Coverage band: with n replications and a true coverage of 0.95, the number of intervals
that cover the truth is Binomial(n, 0.95). The band is the central 95% range of that
count divided by n (exact binomial quantiles, `scipy.stats.binom.ppf` at 0.025 and 0.975);
for n = 200 it is [0.92, 0.98], close to the normal approximation
0.95 +- 1.96 x sqrt(0.95 x 0.05 / n) = [0.920, 0.980]. An observed coverage outside the band
is unlikely (about 5%) if the intervals really cover 95% of the time (Morris, White and
Crowther, 2019, on Monte Carlo standard errors of performance measures).
"""
from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd
from scipy.stats import binom

from .montecarlo import FRAMEWORKS, Replication

NOMINAL = 0.95
VERDICTS = ("agree", "explained", "unexplained", "failed")


@dataclass(frozen=True)
class CoverageBand:
    """Where the observed coverage of n intervals falls 95% of the time if their true coverage is nominal."""

    nominal: float
    n: int
    low: float
    high: float


def coverage_band(n: int, nominal: float = NOMINAL) -> CoverageBand:
    """The central 95% range of Binomial(n, nominal) / n."""
    if n < 1:
        return CoverageBand(nominal, n, float("nan"), float("nan"))
    low, high = binom.ppf([0.025, 0.975], n, nominal)
    return CoverageBand(nominal, n, float(low) / n, float(high) / n)


@dataclass(frozen=True)
class QuantitySummary:
    """One quantity in one framework across replications (over converged fits with finite estimate and SE)."""

    quantity: str
    framework: str
    truth: float
    used: int               # replications that enter bias, RMSE and coverage
    mean: float
    bias: float
    bias_mcse: float        # Monte Carlo standard error of the bias: SD of the estimates / sqrt(used)
    rmse: float
    empirical_sd: float
    mean_se: float
    coverage: float
    band: CoverageBand
    convergence: float      # share of all replications in which this framework's fit converged
    agreement: float        # share of all replications whose reconciliation found this quantity within tolerance
    paired_difference: float = float("nan")       # mean of (wide - long) over replications where both converged
    paired_difference_mcse: float = float("nan")  # its Monte Carlo SE: SD of the differences / sqrt(count)

    @property
    def within_band(self) -> bool:
        return bool(self.band.low <= self.coverage <= self.band.high)

    @property
    def band_position(self) -> str:
        """Where the observed coverage lies against its band, in words: inside, below or above."""
        if self.coverage < self.band.low:
            return "below"
        return "above" if self.coverage > self.band.high else "inside"

    @property
    def relative_bias(self) -> tuple[float, float]:
        """Bias and 2 Monte Carlo SE, divided by |truth| (left as they are when the truth is 0)."""
        scale = abs(self.truth) if self.truth else 1.0
        return self.bias / scale, 2 * self.bias_mcse / scale


@dataclass(frozen=True)
class SimulationSummary:
    """The whole study: one row per quantity and framework, the verdict counts, the settings."""

    description: str
    population: str
    replications: int
    seed: int
    quantities: tuple[QuantitySummary, ...]
    verdicts: dict[str, int]
    convergence: dict[str, float]   # per framework: share of replications whose fit converged
    seconds: float          # summed over replications (not wall time)

    @property
    def keys(self) -> tuple[str, ...]:
        return tuple(dict.fromkeys(q.quantity for q in self.quantities))

    def row(self, quantity: str, framework: str) -> QuantitySummary:
        return next(q for q in self.quantities if q.quantity == quantity and q.framework == framework)

    def to_dict(self) -> dict:
        """Plain data for JSON."""
        out = asdict(self)
        for item, q in zip(out["quantities"], self.quantities):
            item["within_band"] = q.within_band
            item["band_position"] = q.band_position
        return out


def replications_frame(replications: tuple[Replication, ...]) -> pd.DataFrame:
    """One row per replication, quantity and framework; a failed replication keeps one row with its error."""
    records = []
    for rep in replications:
        common = {"seed": rep.seed, "replication_verdict": rep.verdict, "seconds": rep.seconds, "error": rep.error}
        if not rep.rows:
            records.append({"replication": rep.index, **common})
        records += [{**vars(row), **common} for row in rep.rows]
    frame = pd.DataFrame.from_records(records)
    return frame.reindex(columns=["replication", "seed", "quantity", "framework", "truth", "estimate", "se",
                                  "ci_low", "ci_high", "covered", "converged", "verdict", "replication_verdict",
                                  "seconds", "error"])


def _summarise_one(group: pd.DataFrame, total: int) -> dict:
    ok = group[group["converged"].astype(bool) & np.isfinite(group["estimate"]) & np.isfinite(group["se"])]
    errors = ok["estimate"] - ok["truth"]
    n = len(ok)
    sd = float(ok["estimate"].std(ddof=1)) if n > 1 else float("nan")
    return dict(truth=float(group["truth"].iloc[0]), used=n, mean=float(ok["estimate"].mean()) if n else np.nan,
                bias=float(errors.mean()) if n else np.nan, bias_mcse=sd / np.sqrt(n) if n > 1 else np.nan,
                rmse=float(np.sqrt((errors ** 2).mean())) if n else np.nan, empirical_sd=sd,
                mean_se=float(ok["se"].mean()) if n else np.nan,
                coverage=float(ok["covered"].astype(bool).mean()) if n else np.nan, band=coverage_band(n),
                convergence=float(group["converged"].astype(bool).sum()) / total,
                agreement=float((group["verdict"] == "agree").sum()) / total)


def paired_difference(frame: pd.DataFrame, quantity: str) -> tuple[float, float]:
    """Mean of the wide-minus-long estimate over replications where both fits converged, and its Monte Carlo SE.

    The two forms are fitted to the same data set in every replication, so their difference is paired:
    its Monte Carlo SE is the SD of the differences / sqrt(count) (Morris, White & Crowther 2019).
    """
    part = frame[(frame["quantity"] == quantity) & frame["converged"].astype(bool) & np.isfinite(frame["estimate"])]
    wide = part.pivot_table(index="replication", columns="framework", values="estimate", aggfunc="first")
    if not set(FRAMEWORKS) <= set(wide.columns):
        return float("nan"), float("nan")
    diff = (wide["sem"] - wide["mixed"]).dropna()
    if len(diff) < 2:
        return (float(diff.mean()) if len(diff) else float("nan")), float("nan")
    return float(diff.mean()), float(diff.std(ddof=1) / np.sqrt(len(diff)))


def summarise(replications: tuple[Replication, ...], description: str, population: str,
              seed: int) -> SimulationSummary:
    """Bias, RMSE, coverage, convergence, agreement and the paired wide-minus-long difference per quantity."""
    total = len(replications)
    frame = replications_frame(replications).dropna(subset=["quantity"])
    rows = []
    order = list(dict.fromkeys(frame["quantity"]))
    for quantity in order:
        paired = paired_difference(frame, quantity)
        for framework in FRAMEWORKS:
            group = frame[(frame["quantity"] == quantity) & (frame["framework"] == framework)]
            if len(group):
                rows.append(QuantitySummary(quantity=quantity, framework=framework, **_summarise_one(group, total),
                                            paired_difference=paired[0], paired_difference_mcse=paired[1]))
    verdicts = {v: sum(r.verdict == v for r in replications) for v in VERDICTS}
    convergence = {f: min((q.convergence for q in rows if q.framework == f), default=0.0) for f in FRAMEWORKS}
    return SimulationSummary(description=description, population=population, replications=total, seed=seed,
                             quantities=tuple(rows), verdicts=verdicts, convergence=convergence,
                             seconds=float(sum(r.seconds for r in replications)))


def summary_frame(summary: SimulationSummary) -> pd.DataFrame:
    """The summary as a table: one row per quantity and framework."""
    return pd.DataFrame([{"quantity": q.quantity, "framework": q.framework, "truth": q.truth, "used": q.used,
                          "mean": q.mean, "bias": q.bias, "bias_mcse": q.bias_mcse, "rmse": q.rmse,
                          "empirical_sd": q.empirical_sd, "mean_se": q.mean_se, "coverage": q.coverage,
                          "band_low": q.band.low, "band_high": q.band.high, "within_band": q.within_band,
                          "band_position": q.band_position,
                          "convergence": q.convergence, "agreement": q.agreement,
                          "paired_difference": q.paired_difference,
                          "paired_difference_mcse": q.paired_difference_mcse} for q in summary.quantities])

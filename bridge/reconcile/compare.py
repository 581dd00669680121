"""Line the two solutions up quantity by quantity and say whether each pair of numbers agrees."""
from __future__ import annotations

from ..compile import CompiledPair, GrowthParameters
from ..referee.adjudicate import Adjudication
from .result import Estimate, QuantityRow, Verdict
from .tolerance import DEFAULT_TOLERANCE, Tolerance


def _mixed_key(key: str, available: dict) -> str:
    """The mixed model's quantity for a key: its single residual variance stands for every wave's."""
    return key if key in available or not key.startswith("var.residual.") else "var.residual"


def compare(pair: CompiledPair, sem: GrowthParameters, mixed: GrowthParameters, sem_se: dict, mixed_se: dict,
            tolerance: Tolerance = DEFAULT_TOLERANCE, boundary: tuple[bool, bool] = (False, False),
            ) -> tuple[QuantityRow, ...]:
    """One row per quantity of the wide form, with the long form's counterpart and a raw verdict.

    `boundary` says, per form, whether its solution is on the boundary of its space: the standard
    errors of its variance components are then flagged.
    """
    sem_values, mixed_values = pair.sem.to_quantities(sem), pair.mixed.to_quantities(mixed)
    long_names = {c.key: c.long for c in pair.mixed.correspondence}
    rows = []
    for corr in pair.sem.correspondence:
        other = _mixed_key(corr.key, mixed_values)
        if other not in mixed_values:
            continue
        variance = corr.key.startswith(("var.", "cov."))
        a = Estimate(float(sem_values[corr.key]), float(sem_se[corr.key]), _flag(variance and boundary[0]))
        b = Estimate(float(mixed_values[other]), float(mixed_se[other]), _flag(variance and boundary[1]))
        agree = tolerance.agree(a.estimate, b.estimate, a.se, b.se)
        rows.append(QuantityRow(key=corr.key, wide_name=corr.wide, long_name=long_names[other], sem=a, mixed=b,
                                allowed_gap=tolerance.allowed_gap(a.estimate, b.estimate, a.se, b.se),
                                verdict=Verdict.AGREE if agree else Verdict.UNEXPLAINED))
    return tuple(rows)


def _flag(on_boundary: bool) -> str:
    return "boundary" if on_boundary else ""


def on_boundary(certificate) -> bool:
    """Whether a certified solution sits on the boundary of its space (a bound held, or a flat direction)."""
    return bool(certificate.boundary) or certificate.curvature.startswith("flat")


def compare_adjudicated(pair: CompiledPair, adj: Adjudication, first: bool = False,
                        tolerance: Tolerance = DEFAULT_TOLERANCE) -> tuple[QuantityRow, ...]:
    """Rows for the final solutions, or (`first=True`) for the libraries' first answers."""
    sem, mixed = (adj.first_sem, adj.first_mixed) if first else (adj.sem, adj.mixed)
    by_form = {c.form: on_boundary(c) for c in adj.certificates}
    return compare(pair, sem.params, mixed.params, adj.sem_se, adj.mixed_se, tolerance,
                   (by_form.get("wide", False), by_form.get("long", False)))

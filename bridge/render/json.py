"""The JSON contract (docs/json.md): a pure function of the reconciliation."""
from __future__ import annotations

import json
import math

from ..reconcile import Reconciliation

SCHEMA_VERSION = 1


def _number(value: float) -> float | None:
    return float(value) if value is not None and math.isfinite(value) else None


def _plain(value):
    """Details as JSON-ready data: numbers made finite-or-null, containers walked."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (bool, int, str)) or value is None:
        return value
    if isinstance(value, (int, float)) or hasattr(value, "__float__"):
        return _number(float(value))
    return str(value)


def _estimate(e) -> dict:
    out = {"estimate": _number(e.estimate), "se": _number(e.se)}
    if e.se_flag:
        out["se_flag"] = e.se_flag
    return out


def _form_fit(fit) -> dict | None:
    if fit is None:
        return None
    return {"log_likelihood": _number(fit.log_likelihood), "parameters": fit.parameters,
            "chi_square": _number(fit.chi_square), "df": fit.df, "p_value": _number(fit.p_value),
            "rmsea": _number(fit.rmsea), "rmsea_ci90": [_number(v) for v in fit.rmsea_ci90],
            "cfi": _number(fit.cfi), "tli": _number(fit.tli), "srmr": _number(fit.srmr)}


def absolute_fit_dict(fit) -> dict | None:
    """`referee.absolute_fit.AbsoluteFit` as JSON data: numbers, or null with the reason in words."""
    if fit is None:
        return None
    baseline = None if fit.baseline_df is None else {"chi_square": _number(fit.baseline_chi_square),
                                                     "df": fit.baseline_df}
    return {"saturated_log_likelihood": _number(fit.saturated_log_likelihood), "persons": fit.persons,
            "moments": fit.moments, "baseline": baseline,
            "sem": _form_fit(fit.sem), "sem_reason": fit.sem_reason or None,
            "mixed": _form_fit(fit.mixed), "mixed_reason": fit.mixed_reason or None,
            "reason": fit.reason or None, "note": fit.note or None}


def to_dict(rec: Reconciliation) -> dict:
    """The reconciliation as plain JSON-ready data (non-finite numbers become null)."""
    return {
        "schema": SCHEMA_VERSION,
        "description": rec.description,
        "verdict": rec.verdict.value,
        "timing": _plain(rec.timing),
        "data": _plain(rec.data),
        "log_likelihood": {k: _number(v) for k, v in rec.log_likelihood.items()},
        "referee_checks": _plain(list(rec.referee_checks)),
        "refits": _plain(list(rec.refits)),
        "absolute_fit": absolute_fit_dict(rec.absolute_fit),
        "quantities": [{"key": r.key, "wide_name": r.wide_name, "long_name": r.long_name,
                        "sem": _estimate(r.sem), "mixed": _estimate(r.mixed),
                        "difference": _number(r.difference), "allowed_gap": _number(r.allowed_gap),
                        "verdict": r.verdict.value, "causes": list(r.causes)} for r in rec.quantities],
        "certificates": [_plain(c.to_dict()) for c in rec.certificates],
        "undecided_reason": rec.undecided_reason or None,
        "explanations": [{"cause": e.cause, "kind": "note" if e.note else "explanation", "title": e.title, "quantities": list(e.quantities),
                          "gap_before": {k: _number(v) for k, v in e.gap_before.items()},
                          "gap_after": {k: _number(v) for k, v in e.gap_after.items()},
                          "evidence": e.evidence, "why": e.why, "details": _plain(e.details)}
                         for e in rec.explanations],
        "findings": [{"code": f.code, "library": f.library, "message": f.message} for f in rec.findings],
        "tolerance": rec.tolerance,
        "caution": rec.caution,
    }


def to_json(rec: Reconciliation) -> str:
    return json.dumps(to_dict(rec), indent=2, allow_nan=False) + "\n"

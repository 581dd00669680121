"""The verdict rule: `agree` needs certified maxima, `explained` needs the refit without the cause.

Each case reuses a constructed case of tests/test_explanations.py (simulated with fixed seeds, or open
data with published fits named there) and takes one proof away: the refit that removes a cause, or
the library's honesty about its own log-likelihood. The verdict must then say less, never more.
"""
from __future__ import annotations

from dataclasses import replace

import pytest

import bridge
import bridge.families.cross_lagged.reconcile as panel_reconcile
import bridge.fit.sem
import bridge.reconcile.explain as explain
import bridge.reconcile.parameter_space as parameter_space
import bridge.referee.adjudicate as adjudicate
from bridge.reconcile import Verdict
from bridge.reconcile.causes import CATALOGUE
from bridge.reconcile.harmonise import HARMONISERS
from conftest import write_case
from test_explanations import CASES, _table

# Causes of the growth family proved by a harmonised refit, and the case that holds each.
PLAN_CAUSES = {"estimation-method": "estimation-method", "residual-structure": "residual-structure",
               "missing-data": "missing-data", "time-binning": "time-binning", "time-coding": "time-coding"}


def _run(tmp_path, name: str):
    frame, description = CASES[name]()
    return bridge.run(write_case(tmp_path, frame, description))


def _withheld(cause: str):
    """The harmonisers with `cause`'s refit withheld: detected as before, but its plan is left as it was."""
    return tuple(replace(h, remove=lambda plan, base: plan) if h.cause == cause else h for h in HARMONISERS)


@pytest.mark.parametrize("cause", sorted(PLAN_CAUSES))
def test_a_cause_whose_refit_is_withheld_explains_nothing(tmp_path, monkeypatch, cause):
    monkeypatch.setattr(explain, "HARMONISERS", _withheld(cause))
    rec = _run(tmp_path, PLAN_CAUSES[cause])
    assert rec.verdict is Verdict.UNEXPLAINED and rec.exit_code == 3, _table(rec)
    assert not any(cause in row.causes for row in rec.quantities)
    assert all(e.cause != cause or e.note for e in rec.explanations)


def test_a_boundary_whose_refit_is_withheld_explains_nothing(tmp_path, monkeypatch):
    # Zero slope variance simulated from the model itself: the forms agree; without the refit at the
    # boundary the boundary may still be noted, but it can explain nothing.
    monkeypatch.setattr(explain, "HARMONISERS", _withheld("boundary"))
    rec = _run(tmp_path, "boundary-note")
    assert rec.verdict is Verdict.AGREE, _table(rec)
    assert not any("boundary" in row.causes for row in rec.quantities)
    assert all(e.note for e in rec.explanations if e.cause == "boundary")


def test_the_parameter_space_cause_without_its_constrained_maximum_explains_nothing(tmp_path, monkeypatch):
    monkeypatch.setattr(parameter_space, "constrained", lambda evaluation: evaluation)
    rec = _run(tmp_path, "parameter-space")
    assert rec.verdict is Verdict.UNEXPLAINED and rec.exit_code == 3, _table(rec)
    assert not any("parameter-space" in row.causes for row in rec.quantities)


def test_a_library_that_stopped_short_and_is_not_refitted_leaves_the_verdict_undecided(tmp_path, monkeypatch):
    # semopy capped at its first reported success (about 25 log-likelihood units short on the rat body
    # weights of Pinheiro & Bates 2000), and every refit the referee would order withheld.
    monkeypatch.setattr(bridge.fit.sem, "MAX_FITS", 1)
    monkeypatch.setattr(adjudicate._Judge, "better", lambda self, library, current, *args: current)
    original = adjudicate._Judge.certified
    monkeypatch.setattr(adjudicate._Judge, "certified",
                        lambda self, library, compiled, fit, refit: original(self, library, compiled, fit, refit, 0))
    rec = _run(tmp_path, "optimizer")
    assert rec.verdict is Verdict.UNDECIDED and rec.exit_code == 4, _table(rec)
    failed = {c.library: c for c in rec.certificates if not c.passed}
    assert "semopy" in failed and "log-likelihood units higher" in failed["semopy"].reason
    assert not rec.explanations
    assert all(r.verdict is Verdict.UNDECIDED for r in rec.quantities)


def test_a_wrong_reported_log_likelihood_is_caught(tmp_path, monkeypatch):
    # The estimates are right, only the value semopy reports is 50 units off: nothing it says can be trusted.
    original = bridge.fit.sem.fit_sem

    def misreporting(compiled, start=None):
        fit = original(compiled, start)
        return replace(fit, own_log_likelihood=fit.own_log_likelihood - 50.0)

    monkeypatch.setattr(adjudicate, "fit_sem", misreporting)
    monkeypatch.setattr("bridge.reconcile.evaluation.fit_sem", misreporting)
    rec = _run(tmp_path, "estimation-method")
    assert rec.verdict is Verdict.UNDECIDED and rec.exit_code == 4, _table(rec)
    assert "reports log-likelihood" in rec.undecided_reason and "semopy" in rec.undecided_reason
    failed = [c for c in rec.certificates if not c.passed]
    assert failed and failed[0].reported == pytest.approx(failed[0].referee - 50.0, abs=1e-6)


def test_certified_solutions_are_exact_maxima_of_their_own_models(tmp_path):
    # The two libraries are polished until each estimate is within 1e-5 relative (or 1e-3 SE) of the
    # referee's maximum; the certificates record it.
    rec = _run(tmp_path, "estimation-method")
    assert [c.library for c in rec.certificates] == ["semopy", "statsmodels"]
    for c in rec.certificates:
        assert c.passed, c.reason
        assert c.largest_move <= 1.0 and c.gain <= 1e-6
        assert abs(c.reported - c.referee) <= 1e-6 * abs(c.referee)
    assert rec.certificates[1].criterion == "reml" and rec.certificates[0].criterion == "ml"


def test_every_cause_in_the_catalogue_is_covered_by_a_withholding_test():
    # The growth catalogue lists its causes; each that can change a verdict has a case above. (The
    # cross-lagged family's own causes are tested below; short-panel bias is a note by construction.)
    notes_only = {c.key for c in CATALOGUE.values() if not c.changes_verdict}
    growth = set(PLAN_CAUSES) | {"parameter-space", "optimizer", "boundary"}
    assert set(CATALOGUE) - notes_only <= growth


# --- the cross-lagged family: the same rule ------------------------------------------------------

def _panel_run(tmp_path, name: str):
    from test_cross_lagged import VARIANT, description, simulated

    return bridge.run(write_case(tmp_path, simulated(name), description(VARIANT[name])))


def test_initial_conditions_without_the_restricted_refit_explain_nothing(tmp_path, monkeypatch):
    # The relaxed wide fit stands in for the refit with the person effects unrelated to the first wave:
    # the cause is still detected, but nothing was refitted, so nothing may be explained.
    original = panel_reconcile._initial_conditions
    monkeypatch.setattr(panel_reconcile, "_initial_conditions",
                        lambda base, restricted, rows: original(base, base, rows))
    rec = _panel_run(tmp_path, "dynamic-panel")
    assert rec.verdict is Verdict.UNEXPLAINED and rec.exit_code == 3, _table(rec)
    assert not any(row.causes for row in rec.quantities)


def test_missing_data_without_the_complete_case_refit_explains_nothing(tmp_path, monkeypatch):
    # The refit on persons observed at every wave is withheld: the first fit is returned in its place.
    fits = []

    def first_fit_only(*args, **kwargs):
        if fits:
            return fits[0]
        fits.append(original(*args, **kwargs))
        return fits[0]

    original = panel_reconcile.fit_panel
    monkeypatch.setattr(panel_reconcile, "fit_panel", first_fit_only)
    rec = _panel_run(tmp_path, "missing")
    assert rec.verdict is Verdict.UNEXPLAINED and rec.exit_code == 3, _table(rec)
    assert not any("missing-data" in row.causes for row in rec.quantities)

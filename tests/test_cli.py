"""The `sembridge` command line on simulated data: exit codes, the JSON file and its names, compile, progress.

The commands run as real subprocesses (the console script's entry point `bridge.cli:main`, with this
interpreter). They are started together when the module begins, because each process spends a few
seconds importing the fitting libraries; every test then waits for the run it inspects.
"""
from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys
import threading
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import pytest

from conftest import write_case

import bridge
from bridge.simulate.growth import GrowthTruth, simulate_growth

CLI = [sys.executable, "-c", "import sys; from bridge.cli import main; sys.argv[0] = 'sembridge'; sys.exit(main())"]
TIMEOUT = 300
WAVES = (0.0, 1.0, 2.0, 3.0, 4.0)
PROGRESS = re.compile(r"(?i)\bfitting\b|reading the description")

# Balanced data (everyone at every wave, exact wave times): the two frameworks fit the same model.
BALANCED = GrowthTruth(n_persons=200, waves=WAVES, mean={"intercept": 10.0, "slope": 2.0},
                       random_cov=((4.0, 0.5), (0.5, 1.0)), residual=1.0,
                       predictors={"grp": "binary:low,high"}, effects={"grp": {"intercept": 1.0, "slope": 0.5}})
# The same growth with clearly unequal residual variances, one per wave: 1, 4, 9, 16, 25.
UNEQUAL = GrowthTruth(n_persons=200, waves=WAVES, mean={"intercept": 10.0, "slope": 2.0},
                      random_cov=((4.0, 0.5), (0.5, 1.0)), residual=(1.0, 4.0, 9.0, 16.0, 25.0))

LONG = {"layout": "long", "person": "person", "time": "time", "outcome": "outcome"}
BALANCED_DESCRIPTION = {"data": LONG, "model": {"kind": "growth", "shape": "linear", "random": ["intercept", "slope"],
                                                "predictors": ["grp"], "reference_levels": {"grp": "low"}},
                        "estimation": {"method": "ml"}}
PER_WAVE_DESCRIPTION = {"data": LONG, "model": {"kind": "growth", "shape": "linear", "residuals": "per-wave"},
                        "estimation": {"method": "ml"}}
#: The quantities of BALANCED_DESCRIPTION, written out by hand from the key grammar.
BALANCED_KEYS = {"mean.intercept", "mean.slope", "effect.grp[high].intercept", "effect.grp[high].slope",
                 "var.intercept", "cov.intercept.slope", "var.slope", "var.residual"}


write = write_case  # module-scoped fixtures need the plain function


@dataclass
class Run:
    returncode: int
    stdout: str
    stderr: str     # the captured stderr, or everything written to the terminal when run on one


def run_piped(args: list[str], cwd: Path) -> Run:
    done = subprocess.run(CLI + args, cwd=cwd, capture_output=True, text=True, timeout=TIMEOUT,
                          stdin=subprocess.DEVNULL)
    return Run(done.returncode, done.stdout, done.stderr)


def run_on_terminal(args: list[str], cwd: Path) -> Run:
    """Run with stderr attached to a pseudo-terminal (stdout stays a pipe)."""
    master, slave = os.openpty()
    env = {**os.environ, "TERM": "xterm-256color"}
    for name in ("NO_COLOR", "FORCE_COLOR", "TTY_COMPATIBLE", "TTY_INTERACTIVE"):
        env.pop(name, None)
    proc = subprocess.Popen(CLI + args, cwd=cwd, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                            stderr=slave, env=env)
    os.close(slave)
    chunks: list[bytes] = []

    def pump() -> None:
        while True:
            try:
                data = os.read(master, 4096)
            except OSError:   # the terminal closes when the process ends
                return
            if not data:
                return
            chunks.append(data)

    reader = threading.Thread(target=pump, daemon=True)
    reader.start()
    try:
        stdout, _ = proc.communicate(timeout=TIMEOUT)
    finally:
        reader.join(timeout=10)
        os.close(master)
    return Run(proc.returncode, stdout.decode("utf-8", "replace"), b"".join(chunks).decode("utf-8", "replace"))


def snapshot(folder: Path) -> dict[str, tuple[bytes, int]]:
    return {p.name: (p.read_bytes(), p.stat().st_mtime_ns) for p in sorted(folder.iterdir()) if p.is_file()}


@dataclass
class Setup:
    inputs: Path
    out: Path
    balanced: Path
    per_wave: Path
    before: dict[str, tuple[bytes, int]]
    runs: dict[str, Future]


@pytest.fixture(scope="module")
def setup(tmp_path_factory) -> Setup:
    inputs, out = tmp_path_factory.mktemp("inputs"), tmp_path_factory.mktemp("out")
    balanced = write(inputs, simulate_growth(BALANCED, 11), BALANCED_DESCRIPTION, "balanced")
    per_wave = write(inputs, simulate_growth(UNEQUAL, 12), PER_WAVE_DESCRIPTION, "per_wave")
    before = snapshot(inputs)
    jobs = {
        "json-file": (run_piped, ["reconcile", str(balanced), "--json", str(out / "balanced.json")]),
        "json-stdout": (run_piped, ["reconcile", str(balanced), "--json", "-"]),
        "per-wave": (run_piped, ["reconcile", str(per_wave), "--json", str(out / "per_wave.json")]),
        "compile": (run_piped, ["compile", str(balanced)]),
        "terminal": (run_on_terminal, ["reconcile", str(balanced)]),
        "terminal-quiet": (run_on_terminal, ["reconcile", str(balanced), "--quiet"]),
    }
    pool = ThreadPoolExecutor(max_workers=max(2, os.cpu_count() or 2))
    runs = {name: pool.submit(runner, args, out) for name, (runner, args) in jobs.items()}
    yield Setup(inputs, out, balanced, per_wave, before, runs)
    pool.shutdown(wait=True, cancel_futures=True)


@pytest.fixture(scope="module")
def api_result(setup) -> dict:
    """The same description through the Python API, in this process."""
    return bridge.to_dict(bridge.run(setup.balanced))


def close(a: float | None, b: float | None, rel: float = 1e-8) -> bool:
    if a is None or b is None:
        return a is b
    return math.isclose(a, b, rel_tol=rel, abs_tol=1e-300)


# --- reconcile --json FILE ----------------------------------------------------------------------------

def test_reconcile_balanced_exits_0_and_writes_the_api_result(setup, api_result):
    run = setup.runs["json-file"].result()
    assert run.returncode == 0, run.stderr
    written = json.loads((setup.out / "balanced.json").read_text(encoding="utf-8"))
    assert written["verdict"] == api_result["verdict"] == "agree"
    assert written["timing"]["design"] == api_result["timing"]["design"] == "balanced"
    assert [q["key"] for q in written["quantities"]] == [q["key"] for q in api_result["quantities"]]
    for mine, theirs in zip(written["quantities"], api_result["quantities"]):
        for form in ("sem", "mixed"):
            for field in ("estimate", "se"):
                assert close(mine[form][field], theirs[form][field]), (mine["key"], form, field,
                                                                       mine[form][field], theirs[form][field])


def test_json_file_follows_the_contract_names(setup):
    setup.runs["json-file"].result()
    written = json.loads((setup.out / "balanced.json").read_text(encoding="utf-8"))
    assert written["verdict"] in {"agree", "explained", "unexplained"}
    assert written["timing"]["design"] in {"balanced", "balanced-missing", "individually-varying"}
    assert {q["key"] for q in written["quantities"]} == BALANCED_KEYS
    for q in written["quantities"]:
        for form in ("sem", "mixed"):
            for field in ("estimate", "se"):
                value = q[form][field]
                assert isinstance(value, float) and math.isfinite(value), (q["key"], form, field, value)
            assert q[form]["se"] > 0, (q["key"], form)
        assert q["verdict"] in {"agree", "explained", "unexplained"}
    ll = written["log_likelihood"]
    for name in ("sem", "mixed", "referee_at_sem", "referee_at_mixed"):
        assert isinstance(ll[name], float) and math.isfinite(ll[name]), (name, ll)
    # balanced data and ML: both libraries reach the same maximum, and the referee confirms it
    assert math.isclose(ll["referee_at_sem"], ll["referee_at_mixed"], rel_tol=1e-6), ll


def test_reconcile_recovers_the_simulated_values(setup):
    """A sanity anchor independent of both libraries: estimates land near the truth that generated the data."""
    setup.runs["json-file"].result()
    rows = {q["key"]: q for q in json.loads((setup.out / "balanced.json").read_text())["quantities"]}
    for key, truth in {"mean.intercept": 10.0, "mean.slope": 2.0, "effect.grp[high].intercept": 1.0,
                       "effect.grp[high].slope": 0.5, "var.residual": 1.0}.items():
        row = rows[key]
        assert abs(row["sem"]["estimate"] - truth) < 4 * row["sem"]["se"], (key, row["sem"], truth)


def test_reconcile_leaves_its_inputs_untouched(setup):
    for future in setup.runs.values():
        future.result()
    assert snapshot(setup.inputs) == setup.before


def test_terminal_report_names_every_quantity_verbatim(setup):
    run = setup.runs["json-file"].result()
    assert run.returncode == 0, run.stderr
    for key in sorted(BALANCED_KEYS):
        assert re.search(rf"(?m)^\W*{re.escape(key)}\s", run.stdout), f"{key} missing from the report:\n{run.stdout}"


# --- reconcile --json - --------------------------------------------------------------------------------

def test_json_dash_prints_only_json_on_stdout(setup, api_result):
    run = setup.runs["json-stdout"].result()
    assert run.returncode == 0, run.stderr
    assert run.stdout.lstrip().startswith("{") and run.stdout.rstrip().endswith("}"), run.stdout[:300]
    printed = json.loads(run.stdout)   # fails on any text before or after the document
    assert printed["verdict"] == api_result["verdict"]
    assert [q["key"] for q in printed["quantities"]] == [q["key"] for q in api_result["quantities"]]
    assert not PROGRESS.search(run.stderr), run.stderr


# --- per-wave residuals --------------------------------------------------------------------------------

def test_per_wave_residuals_are_reported_per_wave_and_unexplained(setup):
    run = setup.runs["per-wave"].result()
    written = json.loads((setup.out / "per_wave.json").read_text(encoding="utf-8"))
    keys = [q["key"] for q in written["quantities"]]
    wave_keys = [f"var.residual.{w:g}" for w in WAVES]
    assert [k for k in keys if k.startswith("var.residual")] == wave_keys, keys
    sem = {q["key"]: q["sem"]["estimate"] for q in written["quantities"]}
    # the wide form really estimates one residual per wave: they follow the simulated 1, 4, 9, 16, 25
    assert sem["var.residual.4"] > 5 * sem["var.residual.0"], sem
    assert written["verdict"] == "unexplained"
    assert run.returncode == 3, (run.returncode, run.stderr)


# --- compile -------------------------------------------------------------------------------------------

def test_compile_prints_both_specifications_and_every_key(setup):
    run = setup.runs["compile"].result()
    assert run.returncode == 0, run.stderr
    assert "=~" in run.stdout
    assert "MixedLM" in run.stdout
    correspondence = {c.key for c in bridge.compile_description(setup.balanced).sem.correspondence}
    assert BALANCED_KEYS <= correspondence
    for key in sorted(correspondence):
        assert key in run.stdout, f"{key} missing from compile output"


def test_compile_keys_match_the_reconciled_quantities(setup):
    setup.runs["compile"].result()
    setup.runs["json-file"].result()
    reconciled = {q["key"] for q in json.loads((setup.out / "balanced.json").read_text())["quantities"]}
    correspondence = {c.key for c in bridge.compile_description(setup.balanced).sem.correspondence}
    assert reconciled == correspondence


def test_compile_does_not_fit(setup, monkeypatch):
    """Both libraries' fitting routines and the pipeline's fitting stage are booby-trapped."""
    import semopy
    from statsmodels.regression.mixed_linear_model import MixedLM
    from typer.testing import CliRunner

    import bridge.fit.mixed
    import bridge.fit.sem
    import bridge.reconcile.evaluation
    from bridge import cli

    def refuse(*_args, **_kwargs):
        raise AssertionError("compile must not fit anything")

    monkeypatch.setattr(semopy.Model, "fit", refuse)
    monkeypatch.setattr(MixedLM, "fit", refuse)
    monkeypatch.setattr(bridge.reconcile.evaluation, "evaluate", refuse)
    monkeypatch.setattr(bridge.fit.sem, "fit_sem", refuse)
    monkeypatch.setattr(bridge.fit.mixed, "fit_mixed", refuse)
    result = CliRunner().invoke(cli.app, ["compile", str(setup.balanced)])
    assert result.exception is None, repr(result.exception)
    assert result.exit_code == 0, result.output
    assert "=~" in result.output and "MixedLM" in result.output


# --- progress messages ---------------------------------------------------------------------------------

def test_no_progress_messages_when_stderr_is_not_a_terminal(setup):
    run = setup.runs["json-file"].result()
    assert run.returncode == 0
    assert not PROGRESS.search(run.stderr), run.stderr
    assert not re.search(r"\d\.\d s\b", run.stderr), run.stderr


def test_progress_messages_appear_on_a_terminal(setup):
    """The control for the test above: on a terminal the same run does report its stages."""
    run = setup.runs["terminal"].result()
    assert run.returncode == 0, run.stderr
    assert PROGRESS.search(run.stderr), run.stderr[-2000:]


def test_quiet_flag_is_accepted_and_silences_progress_on_a_terminal(setup):
    run = setup.runs["terminal-quiet"].result()
    assert run.returncode == 0, run.stderr
    assert not PROGRESS.search(run.stderr), run.stderr[-2000:]
    assert "agree" in run.stdout

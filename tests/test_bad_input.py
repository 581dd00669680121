"""Bad input through the real command line: one line on stderr, exit code 2, no traceback, inputs untouched.

Every case runs the installed entry point (`bridge.cli:main`) in its own subprocess. Starting the
interpreter and importing both fitting libraries takes a few seconds per process, so the module starts
every selected case at once on a small thread pool and each test then waits for its own result.
The data are small invented frames (a few persons x 4 waves, numpy default_rng(0)); they exist only to
trip the input checks.
"""
from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
import pytest
import yaml

# The console script `sembridge` is `bridge.cli:main`; call it the same way, with this interpreter.
CLI = [sys.executable, "-c", "import sys; from bridge.cli import main; sys.argv[0] = 'sembridge'; sys.exit(main())"]
TIMEOUT = 240
CRAFTED = "__import__('os').system('touch PWNED')"
CANARY = "PWNED"


# --- invented data ---------------------------------------------------------------------------------

def frame(n_persons: int = 6, waves: tuple[float, ...] = (0.0, 1.0, 2.0, 3.0)) -> pd.DataFrame:
    """Long data: person, time, y, and a time-invariant numeric predictor x."""
    rng = np.random.default_rng(0)
    level, gain = rng.normal(10.0, 2.0, n_persons), rng.normal(2.0, 0.5, n_persons)
    x = rng.normal(0.0, 1.0, n_persons).round(3)
    rows = [{"person": f"p{i + 1}", "time": t, "y": round(level[i] + gain[i] * t + rng.normal(0.0, 1.0), 4),
             "x": x[i]} for i in range(n_persons) for t in waves]
    return pd.DataFrame(rows)


def description(**data_changes) -> dict:
    """A valid long-layout linear description; `model`/`estimation` sections are added by callers."""
    return {"data": {"layout": "long", "person": "person", "time": "time", "outcome": "y", **data_changes},
            "model": {"kind": "growth", "shape": "linear"}}


def write(folder: Path, data: pd.DataFrame | None, desc: dict, name: str = "model") -> Path:
    """Write the frame as CSV (unless None) and the description as YAML; return the YAML path."""
    data_path = folder / f"{name}.csv"
    if data is not None:
        data.to_csv(data_path, index=False)
    desc = {**desc, "data": {**desc["data"], "path": data_path.name}}
    spec = folder / f"{name}.yaml"
    spec.write_text(yaml.safe_dump(desc, sort_keys=False), encoding="utf-8")
    return spec


def with_model(**changes) -> dict:
    d = description()
    d["model"] = {**d["model"], **changes}
    return d


def reconcile(spec: Path) -> list[str]:
    return ["reconcile", spec.name]


# --- case builders: each takes an empty folder, writes the inputs and returns the command's arguments --

def spec_case(data: Callable[[], pd.DataFrame | None], desc: Callable[[], dict]) -> Callable[[Path], list[str]]:
    return lambda folder: reconcile(write(folder, data(), desc()))


def raw_yaml_case(text: str, data: Callable[[], pd.DataFrame | None] = frame) -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        content = data()
        if content is not None:
            content.to_csv(folder / "model.csv", index=False)
        (folder / "model.yaml").write_text(text, encoding="utf-8")
        return ["reconcile", "model.yaml"]
    return build


def missing_description(folder: Path) -> list[str]:
    frame().to_csv(folder / "model.csv", index=False)
    return ["reconcile", "absent.yaml"]


def missing_data(folder: Path) -> list[str]:
    spec = write(folder, None, description())
    return reconcile(spec)


def data_bytes(content: bytes) -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        spec = write(folder, None, description())
        (folder / "model.csv").write_bytes(content)
        return reconcile(spec)
    return build


def changed(change: Callable[[pd.DataFrame], pd.DataFrame], **frame_args) -> Callable[[], pd.DataFrame]:
    return lambda: change(frame(**frame_args))


def set_value(column: str, row: int, value) -> Callable[[pd.DataFrame], pd.DataFrame]:
    def change(f: pd.DataFrame) -> pd.DataFrame:
        f[column] = f[column].astype(object) if isinstance(value, str) else f[column]
        f.loc[row, column] = value
        return f
    return change


def duplicate_row(f: pd.DataFrame) -> pd.DataFrame:
    extra = f[(f["person"] == "p2") & (f["time"] == 2.0)]
    return pd.concat([f, extra], ignore_index=True)


def varying_predictor(f: pd.DataFrame) -> pd.DataFrame:
    f.loc[(f["person"] == "p2") & (f["time"] == 3.0), "x"] = 99.0
    return f


def missing_predictor(f: pd.DataFrame) -> pd.DataFrame:
    f.loc[f["person"] == "p3", "x"] = np.nan
    return f


def constant_outcome(f: pd.DataFrame) -> pd.DataFrame:
    return f.assign(y=5.0)


def wide_one_column(folder: Path) -> list[str]:
    wide = frame().pivot(index="person", columns="time", values="y")
    wide.columns = [f"y{int(t)}" for t in wide.columns]
    desc = {"data": {"layout": "wide", "person": "person", "columns": {"y0": 0}},
            "model": {"kind": "growth", "shape": "linear"}}
    return reconcile(write(folder, wide.reset_index(), desc))


def crafted(role: str) -> Callable[[Path], list[str]]:
    """A column named like a Python expression, used as outcome, person or predictor."""
    def build(folder: Path) -> list[str]:
        f = frame(n_persons=12)
        desc = description()
        if role == "outcome":
            f = f.rename(columns={"y": CRAFTED})
            desc["data"]["outcome"] = CRAFTED
        elif role == "person":
            # the person ids are expressions too
            f = f.assign(person=f["person"].map(lambda p: f"{CRAFTED} or '{p}'")).rename(columns={"person": CRAFTED})
            desc["data"]["person"] = CRAFTED
        else:
            f = f.rename(columns={"x": CRAFTED})
            desc["model"]["predictors"] = [CRAFTED]
        return reconcile(write(folder, f, desc)) + ["--json", "result.json"]
    return build


def debug_flag(folder: Path) -> list[str]:
    spec = write(folder, frame(), description(outcome="score"))
    return ["--debug", "reconcile", spec.name]


# YAML written by hand so that line numbers are known.
TWO_BAD_KEYS = """\
data:
  path: model.csv
  layout: long
  person: person
  time: time
  outcome: y
model:
  kind: growth
  shape: linear
  flavour: mint
colour: blue
"""
UNKNOWN_DATA_KEY = TWO_BAD_KEYS.replace("  outcome: y\n", "  outcome: y\n  sheet: 2\n").replace(
    "  flavour: mint\ncolour: blue\n", "")
BAD_INDENT = """\
data:
  path: model.csv
  layout: long
  person: person
  time: time
   outcome: y
"""
UNSAFE_TAG = """\
data: !!python/object/apply:os.system ["touch PWNED"]
model:
  shape: linear
"""


@dataclass(frozen=True)
class Case:
    build: Callable[[Path], list[str]]
    patterns: tuple[str, ...]          # every regex must match the one stderr line


#: Each case: bad input, exit code 2, one line on stderr matching every pattern.
BAD = {
    "description-file-missing": Case(missing_description, (r"absent\.yaml", r"(?i)not found|no such|missing")),
    "data-file-missing": Case(missing_data, (r"model\.csv", r"(?i)not found|no such|missing")),
    "data-file-empty": Case(data_bytes(b""), (r"model\.csv", r"(?i)empty")),
    "data-file-header-only": Case(data_bytes(b"person,time,y,x\n"), (r"model\.csv", r"(?i)no rows|empty")),
    "data-file-garbage": Case(data_bytes(bytes(range(256)) * 4), (r"model\.csv", r"(?i)cannot read|unreadable")),
    "unknown-person-column": Case(spec_case(frame, lambda: description(person="who")),
                                  (r"(?i)unknown column", r"\bwho\b", r"data\.person")),
    "unknown-time-column": Case(spec_case(frame, lambda: description(time="when")),
                                (r"(?i)unknown column", r"\bwhen\b", r"data\.time")),
    "unknown-outcome-column": Case(spec_case(frame, lambda: description(outcome="score")),
                                   (r"(?i)unknown column", r"\bscore\b", r"data\.outcome")),
    "unknown-predictor-column": Case(spec_case(frame, lambda: with_model(predictors=["age"])),
                                     (r"(?i)unknown column", r"\bage\b", r"predictors")),
    "outcome-not-numeric": Case(spec_case(changed(set_value("y", 5, "twelve")), description),
                                (r"(?i)outcome", r"(?i)not numeric", r"twelve")),
    "time-not-numeric": Case(spec_case(changed(set_value("time", 3, "late")), description),
                             (r"(?i)time", r"(?i)not numeric", r"late")),
    "time-nan": Case(spec_case(changed(set_value("time", 3, np.nan)), description),
                     (r"'time'", r"(?i)missing|nan")),
    "outcome-inf": Case(spec_case(changed(set_value("y", 4, np.inf)), description),
                        (r"'y'", r"(?i)infinite")),
    "duplicate-person-time": Case(spec_case(changed(duplicate_row), description),
                                  (r"\bp2\b", r"(?i)more than one row|duplicate", r"\b2\b")),
    "predictor-varies-within-person": Case(spec_case(changed(varying_predictor), lambda: with_model(predictors=["x"])),
                                           (r"'x'", r"\bp2\b", r"(?i)changes within|time-invariant|varies")),
    "linear-with-two-times": Case(spec_case(lambda: frame(waves=(0.0, 1.0)), description),
                                  (r"(?i)linear", r"\b3\b", r"(?i)distinct times", r"found 2")),
    "quadratic-with-three-times": Case(spec_case(lambda: frame(waves=(0.0, 1.0, 2.0)),
                                                 lambda: with_model(shape="quadratic")),
                                       (r"(?i)quadratic", r"\b4\b", r"(?i)distinct times", r"found 3")),
    "constant-outcome": Case(spec_case(changed(constant_outcome), description), (r"(?i)outcome", r"(?i)constant")),
    "unknown-top-level-key": Case(raw_yaml_case(TWO_BAD_KEYS.replace("  flavour: mint\n", "")),
                                  (r"\bcolour\b", r"line 10\b")),
    "unknown-data-key": Case(raw_yaml_case(UNKNOWN_DATA_KEY), (r"data\.sheet", r"line 7\b")),
    "unknown-model-key": Case(raw_yaml_case(TWO_BAD_KEYS.replace("colour: blue\n", "")),
                              (r"model\.flavour", r"line 10\b")),
    "unknown-estimation-key": Case(spec_case(frame, lambda: {**description(), "estimation": {"method": "ml",
                                                                                           "optimiser": "fast"}}),
                                   (r"estimation\.optimiser",)),
    "shape-cubic": Case(spec_case(frame, lambda: with_model(shape="cubic")), (r"model\.shape", r"cubic")),
    "method-bayes": Case(spec_case(frame, lambda: {**description(), "estimation": {"method": "bayes"}}),
                         (r"estimation\.method", r"bayes")),
    "layout-diagonal": Case(spec_case(frame, lambda: description(layout="diagonal")),
                            (r"data\.layout", r"diagonal")),
    "residuals-weird": Case(spec_case(frame, lambda: with_model(residuals="weird")),
                            (r"model\.residuals", r"weird")),
    "random-term-not-in-shape": Case(spec_case(frame, lambda: with_model(random=["intercept", "quadratic"])),
                                     (r"model\.random", r"quadratic", r"(?i)linear")),
    "yaml-malformed": Case(raw_yaml_case(BAD_INDENT), (r"model\.yaml", r"(?i)yaml", r"line 6\b")),
    "yaml-unsafe-tag": Case(raw_yaml_case(UNSAFE_TAG), (r"model\.yaml", r"(?i)yaml|tag")),
    "wide-with-one-column": Case(wide_one_column, (r"data\.columns", r"(?i)two|2")),
    "predictor-values-missing": Case(spec_case(changed(missing_predictor), lambda: with_model(predictors=["x"])),
                                     (r"'x'", r"(?i)missing")),
    "all-problems-in-one-line": Case(raw_yaml_case(TWO_BAD_KEYS),
                                     (r"model\.flavour\b.{0,20}\bline 10\b", r"\bcolour\b.{0,20}\bline 11\b")),
}

#: Crafted names: the run may succeed (0/3) or fail cleanly (2), but nothing is ever executed.
CRAFTED_CASES = {f"crafted-{role}": Case(crafted(role), ()) for role in ("outcome", "person", "predictor")}

#: With --debug, the same bad input shows the traceback.
DEBUG = {"debug-shows-traceback": Case(debug_flag, (r"(?i)unknown column", r"\bscore\b"))}

ALL = {**BAD, **CRAFTED_CASES, **DEBUG}


# --- running ---------------------------------------------------------------------------------------

@dataclass
class Run:
    folder: Path
    workdir: Path
    returncode: int
    stdout: str
    stderr: str
    before: dict[str, tuple[bytes, int]]
    after: dict[str, tuple[bytes, int]]


def snapshot(folder: Path) -> dict[str, tuple[bytes, int]]:
    """Bytes and modification time of every input file under `folder`."""
    return {str(p.relative_to(folder)): (p.read_bytes(), p.stat().st_mtime_ns)
            for p in sorted(folder.rglob("*")) if p.is_file()}


def execute(case: Case, folder: Path, workdir: Path) -> Run:
    args = case.build(folder)
    before = snapshot(folder)
    # The command runs in an empty folder of its own; the description is named by its full path.
    args = [str(folder / a) if a.endswith(".yaml") else a for a in args]
    done = subprocess.run(CLI + args, cwd=workdir, capture_output=True, text=True, timeout=TIMEOUT,
                          env={**os.environ, "PYTHONDONTWRITEBYTECODE": "1"})
    return Run(folder, workdir, done.returncode, done.stdout, done.stderr, before, snapshot(folder))


@pytest.fixture(scope="module")
def runs(request, tmp_path_factory) -> dict[str, Future]:
    """Start every selected case at once; each test waits only for its own."""
    wanted = {item.callspec.params["name"] for item in request.session.items
              if item.module is request.module and hasattr(item, "callspec") and "name" in item.callspec.params}
    pool = ThreadPoolExecutor(max_workers=max(2, os.cpu_count() or 2))
    futures = {}
    for name in (n for n in ALL if n in wanted):
        folder = tmp_path_factory.mktemp(name)
        workdir = tmp_path_factory.mktemp(f"{name}-cwd")
        futures[name] = pool.submit(execute, ALL[name], folder, workdir)
    yield futures
    pool.shutdown(wait=True, cancel_futures=True)


def stderr_lines(run: Run) -> list[str]:
    return [line for line in run.stderr.splitlines() if line.strip()]


def assert_inputs_untouched(run: Run) -> None:
    assert run.before, "the case wrote no input files"
    for name, (content, mtime) in run.before.items():
        assert name in run.after, f"input file {name} disappeared"
        assert run.after[name][0] == content, f"input file {name} was modified"
        assert run.after[name][1] == mtime, f"input file {name} has a new modification time"


def assert_one_line_error(run: Run, patterns: tuple[str, ...]) -> None:
    assert "Traceback" not in run.stderr + run.stdout, run.stderr
    assert run.returncode == 2, f"exit code {run.returncode}, stderr: {run.stderr!r}"
    lines = stderr_lines(run)
    assert len(lines) == 1, f"expected one line on stderr, got {len(lines)}: {run.stderr!r}"
    for pattern in patterns:
        assert re.search(pattern, lines[0]), f"{pattern!r} not found in {lines[0]!r}"


def assert_canary_absent(run: Run) -> None:
    places = [run.folder, run.workdir, run.folder.parent, Path.cwd()]
    for place in places:
        assert not (place / CANARY).exists(), f"{place / CANARY} was created: input was executed as code"
    assert not list(run.folder.parent.rglob(CANARY)), "a canary file appeared under the temporary folders"


# --- tests -------------------------------------------------------------------------------------------

@pytest.fixture(scope="module", autouse=True)
def no_canary_before():
    """A canary left in the working folder by something else would make the canary checks meaningless."""
    if (Path.cwd() / CANARY).exists():
        pytest.skip(f"{Path.cwd() / CANARY} exists before the tests; remove it first")


@pytest.mark.parametrize("name", list(BAD))
def test_bad_input_gives_one_line_and_exit_2(name, runs):
    run = runs[name].result()
    assert_one_line_error(run, BAD[name].patterns)
    assert_inputs_untouched(run)
    if name == "yaml-unsafe-tag":
        assert_canary_absent(run)


@pytest.mark.parametrize("name", list(CRAFTED_CASES))
def test_crafted_column_name_is_never_executed(name, runs):
    run = runs[name].result()
    assert_canary_absent(run)
    assert "Traceback" not in run.stderr + run.stdout, run.stderr
    assert run.returncode in (0, 2, 3), f"exit code {run.returncode}, stderr: {run.stderr!r}"
    if run.returncode == 2:
        assert len(stderr_lines(run)) == 1, run.stderr
    elif name == "crafted-predictor":
        # the run went through: the crafted name is reported verbatim, as a name in the quantity keys
        keys = [q["key"] for q in json.loads((run.workdir / "result.json").read_text())["quantities"]]
        assert any(CRAFTED in key for key in keys), keys
    assert_inputs_untouched(run)


@pytest.mark.parametrize("name", list(DEBUG))
def test_debug_flag_shows_traceback(name, runs):
    run = runs[name].result()
    assert "Traceback" in run.stderr, run.stderr
    for pattern in DEBUG[name].patterns:
        assert re.search(pattern, run.stderr), f"{pattern!r} not found in {run.stderr!r}"
    assert "internal error" not in run.stderr, "bad input must not be reported as an internal error"
    assert_inputs_untouched(run)


@pytest.mark.parametrize("name", list(DEBUG))
def test_debug_flag_keeps_exit_code_2(name, runs):
    """--debug changes what is shown, not what the exit code means: bad input is still 2."""
    run = runs[name].result()
    assert run.returncode == 2, f"exit code {run.returncode} with --debug"

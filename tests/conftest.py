"""Shared helpers: write a data frame and a description into a temporary folder."""
from __future__ import annotations

import os
from pathlib import Path

import pandas as pd
import pytest
import yaml


def write_case(folder: Path, frame: pd.DataFrame, description: dict, name: str = "model") -> Path:
    """Write `frame` as CSV and `description` as YAML (data.path filled in); return the YAML path."""
    data_path = folder / f"{name}.csv"
    frame.to_csv(data_path, index=False)
    description = {**description, "data": {**description["data"], "path": data_path.name}}
    spec_path = folder / f"{name}.yaml"
    spec_path.write_text(yaml.safe_dump(description, sort_keys=False), encoding="utf-8")
    return spec_path


@pytest.fixture
def case(tmp_path):
    """`case(frame, description)` -> path of a ready-to-run YAML description."""
    def make(frame: pd.DataFrame, description: dict, name: str = "model") -> Path:
        return write_case(tmp_path, frame, description, name)
    return make


def assert_matches_golden(text: str, golden: Path) -> None:
    """Compare with a stored golden file; SEMBRIDGE_UPDATE_GOLDEN=1 rewrites it first (then review the diff)."""
    if os.environ.get("SEMBRIDGE_UPDATE_GOLDEN"):
        golden.write_text(text, encoding="utf-8")
    assert text == golden.read_text(encoding="utf-8")


# --- the command line in this process (fast: the fitting libraries are imported once) ----------------

import io
import sys
from contextlib import redirect_stderr, redirect_stdout
from dataclasses import dataclass


@dataclass(frozen=True)
class CliRun:
    code: int
    stdout: str
    stderr: str

    @property
    def error_lines(self) -> list[str]:
        return [line for line in self.stderr.splitlines() if line.strip()]


def run_cli(args: list[str], cwd: Path) -> CliRun:
    """Run `sembridge ARGS` through the console entry point (`bridge.cli.main`) in this process, in `cwd`,
    with standard output and error captured (warnings and log lines that reach stderr are captured too)."""
    from bridge.cli import main
    from bridge.cli.app import _state

    out, err = io.StringIO(), io.StringIO()
    old_argv, old_cwd = sys.argv, os.getcwd()
    sys.argv, code = ["sembridge", *map(str, args)], 0
    _state["debug"] = False
    try:
        os.chdir(cwd)
        with redirect_stdout(out), redirect_stderr(err):
            try:
                main()
            except SystemExit as exc:
                code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
    finally:
        sys.argv = old_argv
        os.chdir(old_cwd)
    return CliRun(code, out.getvalue(), err.getvalue())

"""Every code example in docs/ and the README runs (YAML descriptions, commands, Python)."""
from __future__ import annotations

import os
import re
import shlex
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import yaml

import bridge
from bridge.demo.files import GROWTH_DATA, GROWTH_DESCRIPTION, copy_demo

ROOT = Path(__file__).resolve().parents[1]
PAGES = sorted((ROOT / "docs").glob("*.md")) + [ROOT / "README.md"]
BLOCK = re.compile(r"^```(\w+)\n(.*?)^```", re.S | re.M)


def blocks(page: Path, language: str) -> list[str]:
    return [body for lang, body in BLOCK.findall(page.read_text(encoding="utf-8")) if lang == language]


def _merge(base: dict, fragment: dict) -> dict:
    out = dict(base)
    for key, value in fragment.items():
        out[key] = _merge(base.get(key, {}), value) if isinstance(value, dict) and key != "columns" else value
    return out


def _workspace(folder: Path) -> None:
    copy_demo(folder)
    long = pd.read_csv(GROWTH_DATA)
    waves = np.array([0, 6, 12, 18, 24])
    long["column"] = [f"score_m{waves[np.abs(waves - t).argmin()]}" for t in long["months"]]
    wide = long.pivot(index=["student", "format"], columns="column", values="score").reset_index()
    wide.to_csv(folder / "sight_reading_wide.csv", index=False)
    weekly = pd.read_csv(folder / "weekly_practice.csv")
    weekly = weekly.pivot(index="student", columns="week", values=["practice", "confidence"])
    weekly.columns = [f"{name}_{week}" for name, week in weekly.columns]
    weekly.reset_index().to_csv(folder / "weekly_practice_wide.csv", index=False)


YAML_CASES = [(page.name, i, body) for page in PAGES for i, body in enumerate(blocks(page, "yaml"))]


@pytest.mark.parametrize("page,index,body", YAML_CASES, ids=[f"{p}-{i}" for p, i, _ in YAML_CASES])
def test_yaml_example_loads_and_compiles(tmp_path, page, index, body):
    _workspace(tmp_path)
    example = yaml.safe_load(body)
    if "path" not in example.get("data", {}):
        example = _merge(yaml.safe_load(GROWTH_DESCRIPTION.read_text(encoding="utf-8")), example)
    spec = tmp_path / "example.yaml"
    spec.write_text(yaml.safe_dump(example), encoding="utf-8")
    if example.get("model", {}).get("kind") == "cross-lagged":
        from bridge.pipeline import compile_model

        compiled = compile_model(spec)
        assert compiled.keys and " ~ " in compiled.sem.text()
        return
    pair = bridge.compile_description(spec)
    assert pair.sem.keys and "=~" in pair.sem.sem_text


CONSOLE_PAGES = [page for page in PAGES if any("sembridge " in b for b in blocks(page, "console"))]


@pytest.mark.parametrize("page", CONSOLE_PAGES, ids=[p.name for p in CONSOLE_PAGES])
def test_console_and_python_examples_run(tmp_path, page):
    _workspace(tmp_path)
    env = {**os.environ, "COLUMNS": "120", "PYTHONPATH": str(ROOT)}
    for body in blocks(page, "console"):
        for line in body.splitlines():
            if not line.startswith("sembridge "):
                continue  # install and test commands are run by CI itself
            command = shlex.split(line.split("#")[0])
            done = subprocess.run([sys.executable, "-m", "bridge.cli", *command[1:]], cwd=tmp_path, env=env,
                                  capture_output=True, text=True, timeout=600)
            assert done.returncode == 0, f"{line}\n{done.stderr}"
            assert done.stdout.strip()
    for body in blocks(page, "python"):
        previous = Path.cwd()
        os.chdir(tmp_path)
        try:
            exec(compile(body, f"{page.name} example", "exec"), {})
        finally:
            os.chdir(previous)

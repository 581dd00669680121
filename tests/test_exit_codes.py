"""The exit-code contract of docs/commands.md, held to the code: each verdict's code, bad input, bugs,
numerical breakdowns on degenerate data, and `simulate` with failed replications."""
from __future__ import annotations

import re
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
import yaml

from conftest import run_cli

import bridge.pipeline
from bridge.demo import files as demo_files
from bridge.reconcile.result import Reconciliation, Verdict

COMMANDS = Path(__file__).resolve().parents[1] / "docs" / "commands.md"


def documented() -> dict[str, int]:
    """Verdict word -> exit code, from the table under '## Exit codes'."""
    section = COMMANDS.read_text(encoding="utf-8").split("## Exit codes", 1)[1].split("\n## ", 1)[0]
    table = {}
    for code, meaning in re.findall(r"^\| (\d) \| (.*) \|$", section, re.M):
        for word in re.findall(r"verdict `(\w+)`|`(\w+)`\)", meaning):
            table.update({w: int(code) for w in word if w})
    return table


def test_documented_codes_cover_the_contract():
    section = COMMANDS.read_text(encoding="utf-8").split("## Exit codes", 1)[1].split("\n## ", 1)[0]
    assert sorted(int(c) for c in re.findall(r"^\| (\d) \|", section, re.M)) == [0, 1, 2, 3, 4]


@pytest.mark.parametrize("verdict", list(Verdict))
def test_every_verdict_has_its_documented_code(verdict):
    table = documented()
    assert verdict.value in table, f"verdict {verdict.value} is not in docs/commands.md"
    assert Reconciliation.exit_code.fget(SimpleNamespace(verdict=verdict)) == table[verdict.value]


def spec(folder: Path) -> Path:
    (folder / "model.csv").write_text("person,time,y\n" + "".join(f"p{i},{t},{i + t * (1 + i % 3)}\n"
                                                                   for i in range(6) for t in range(4)))
    (folder / "model.yaml").write_text(yaml.safe_dump({"data": {"path": "model.csv", "layout": "long",
                                                                "person": "person", "time": "time", "outcome": "y"}}))
    return folder / "model.yaml"


@pytest.mark.parametrize("verdict", list(Verdict))
def test_the_command_line_exits_with_the_verdicts_code(verdict, tmp_path, monkeypatch):
    spec(tmp_path)
    fake = SimpleNamespace(verdict=verdict, findings=(), exit_code=documented()[verdict.value])
    monkeypatch.setattr(bridge.pipeline, "run", lambda *a, **k: fake)
    monkeypatch.setattr("bridge.render.terminal.render", lambda *a, **k: None)
    assert run_cli(["reconcile", "model.yaml"], tmp_path).code == documented()[verdict.value]


def test_a_bug_is_exit_1_in_one_line(tmp_path, monkeypatch):
    spec(tmp_path)
    monkeypatch.setattr(bridge.pipeline, "run", lambda *a, **k: {}["missing"])
    run = run_cli(["reconcile", "model.yaml"], tmp_path)
    assert run.code == 1 and len(run.error_lines) == 1
    assert re.search(r"internal error: KeyError: 'missing' \(rerun with --debug", run.error_lines[0])


def test_a_singular_matrix_is_bad_input_with_a_hint(tmp_path, monkeypatch):
    spec(tmp_path)

    def singular(*args, **kwargs):
        raise np.linalg.LinAlgError("Singular matrix")
    monkeypatch.setattr(bridge.pipeline, "run", singular)
    run = run_cli(["reconcile", "model.yaml"], tmp_path)
    assert run.code == 2 and len(run.error_lines) == 1
    assert re.search(r"no model that can be fitted \(LinAlgError: Singular matrix\).*model\.time_origin",
                     run.error_lines[0])


def test_simulate_with_failed_replications_exits_2_with_the_count(tmp_path, monkeypatch):
    from bridge.timing import montecarlo

    def failing(desc, truth, replications, seed, workers, scheduler, on_done=None):
        return [montecarlo.Replication(index=i, seed=100 + i, verdict="failed", rows=(), seconds=0.0,
                                       error="ValueError: no persons") for i in range(replications)]
    monkeypatch.setattr(montecarlo, "run_replications", failing)
    run = run_cli(["simulate", str(demo_files.GROWTH_DESCRIPTION), "--population", str(demo_files.GROWTH_POPULATION),
                   "--replications", "3", "--workers", "1", "--out", "study", "--quiet"], tmp_path)
    assert run.code == 2, run.stderr
    assert re.search(r"3 of 3 replications failed; the first \(seed 100\): ValueError: no persons",
                     run.error_lines[0])
    assert (tmp_path / "study" / "summary.json").exists()   # the record of the failures is still written

"""Adversarial input, case by case: what a hostile or careless user might hand the command line.

Each named case writes its inputs into an empty folder, runs `sembridge` in this process (through the
console entry point, `conftest.run_cli`) with that folder as the working folder, and asserts: the exit
code of the contract (docs/commands.md), no traceback, at most one line on standard error matching the
case's patterns, no raw library warning, and every file that existed before the run unchanged (SHA-256).
Cases that should run to the end check their output as well.

The data are small invented frames (numpy default_rng(0)); they exist only to trip the checks.
"""
from __future__ import annotations

import hashlib
import json
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
import pytest
import yaml

from conftest import run_cli

from bridge.demo import files as demo_files
from bridge.outputs import MANIFEST

OK = (0, 3)       # the run reached a verdict (agree/explained, or unexplained)
BAD = (2,)        # bad input


def growth_frame(n: int = 12, waves=(0.0, 1.0, 2.0, 3.0), ids: list[str] | None = None) -> pd.DataFrame:
    """Long data: person, time, y and a time-invariant numeric predictor x (numpy default_rng(0))."""
    rng = np.random.default_rng(0)
    ids = ids or [f"p{i + 1}" for i in range(n)]
    level, gain, x = rng.normal(10, 2, len(ids)), rng.normal(2, 0.5, len(ids)), rng.normal(0, 1, len(ids)).round(3)
    return pd.DataFrame([{"person": pid, "time": t, "y": round(level[i] + gain[i] * t + rng.normal(), 4), "x": x[i]}
                         for i, pid in enumerate(ids) for t in waves])


def description(data: str = "model.csv", **model) -> dict:
    return {"data": {"path": data, "layout": "long", "person": "person", "time": "time", "outcome": "y"},
            "model": {"kind": "growth", "shape": "linear", **model}}


def write(folder: Path, frame: pd.DataFrame | None = None, desc: dict | None = None, text: str | None = None) -> None:
    if frame is not None:
        frame.to_csv(folder / "model.csv", index=False)
    (folder / "model.yaml").write_text(text if text is not None else yaml.safe_dump(desc or description()),
                                       encoding="utf-8")


# --- builders: take an empty folder, write the inputs, return the command's arguments ----------------

def reconcile_with(frame: Callable[[], pd.DataFrame | None] = growth_frame, desc: Callable[[], dict] = description,
                   extra: tuple[str, ...] = ()) -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        write(folder, frame(), desc())
        return ["reconcile", "model.yaml", *extra]
    return build


def yaml_text(text: str, command: str = "reconcile") -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        write(folder, growth_frame(), text=text)
        return [command, "model.yaml"]
    return build


def changed(change: Callable[[pd.DataFrame], pd.DataFrame], **kw) -> Callable[[], pd.DataFrame]:
    return lambda: change(growth_frame(**kw))


def set_cell(column: str, row: int, value) -> Callable[[pd.DataFrame], pd.DataFrame]:
    def change(f: pd.DataFrame) -> pd.DataFrame:
        f[column] = f[column].astype(object)
        f.loc[row, column] = value
        return f
    return change


def valid_yaml(**changes) -> str:
    desc = description()
    for key, value in changes.items():
        section, name = key.split("__")
        desc.setdefault(section, {})[name] = value
    return yaml.safe_dump(desc)


BASE_YAML = yaml.safe_dump(description(), sort_keys=False)


def onto(target: str, command: str = "reconcile", option: str = "--json") -> Callable[[Path], list[str]]:
    """Write the inputs, then ask for an output at `target` (relative to the case folder)."""
    def build(folder: Path) -> list[str]:
        write(folder, growth_frame(), description())
        (folder / "sub").mkdir()
        return [command, "model.yaml", option, target]
    return build


def linked(kind: str) -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        write(folder, growth_frame(), description())
        (os.symlink if kind == "symbolic" else os.link)(folder / "model.csv", folder / "out.json")
        return ["reconcile", "model.yaml", "--json", "out.json"]
    return build


def folder_with(files: dict[str, str], manifest: dict[str, str] | None = None,
                command: tuple[str, ...] = ("draw", "model.yaml", "--structure-only", "--out", "out")):
    """An output folder prepared beforehand: `files`, and a manifest listing `manifest` (name -> content)."""
    def build(folder: Path) -> list[str]:
        write(folder, growth_frame(), description())
        out = folder / "out"
        out.mkdir()
        for name, content in files.items():
            (out / name).write_text(content)
        if manifest is not None:
            listed = {n: [hashlib.sha256(c.encode()).hexdigest()] for n, c in manifest.items()}
            (out / MANIFEST).write_text(json.dumps({"written_by": "sembridge", "files": listed}))
        return list(command)
    return build


def demo_folder(edit: bool, manifest: bool) -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        out = folder / "demo"
        out.mkdir()
        bundled = demo_files.demo_files()
        for name, data in bundled.items():
            (out / name).write_bytes(data)
        if edit:
            (out / "sight_reading.yaml").write_bytes(bundled["sight_reading.yaml"] + b"# my own note\n")
        if manifest:
            listed = {n: [hashlib.sha256(d).hexdigest()] for n, d in bundled.items()}
            (out / MANIFEST).write_text(json.dumps({"written_by": "sembridge", "files": listed}))
        return ["demo", "--out", "demo", "--quiet"]
    return build


def loop(which: str) -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        os.symlink("b.yaml", folder / "a.yaml")
        os.symlink("a.yaml", folder / "b.yaml")
        if which == "description":
            return ["reconcile", "a.yaml"]
        write(folder, None, description(data="a.yaml"))
        return ["reconcile", "model.yaml"]
    return build


def alias_bomb(levels: int = 12) -> str:
    """About 1 kB of nested aliases: 9^12 entries once expanded."""
    lines = ["a0: &a0 [x, x, x, x, x, x, x, x, x]"]
    lines += [f"a{i}: &a{i} [" + ", ".join([f"*a{i - 1}"] * 9) + "]" for i in range(1, levels)]
    return BASE_YAML + "\n".join(lines) + "\n"


def deep_nesting(depth: int = 200) -> str:
    return BASE_YAML + "extra: " + "[" * depth + "]" * depth + "\n"


def text_ids(folder: Path) -> list[str]:
    """Person ids 1.1, 1.10, ... (numbers to a careless reader) and predictor levels 1.5 / 1.50."""
    ids = [f"1.{i}" for i in range(1, 21)]
    f = growth_frame(ids=ids).assign(grp=lambda d: np.where(d["person"].str.len() % 2 == 0, "1.5", "1.50"))
    f.to_csv(folder / "model.csv", index=False)
    (folder / "model.yaml").write_text(yaml.safe_dump(description(predictors=["grp"], categorical=["grp"])))
    return ["reconcile", "model.yaml", "--json", "result.json", "--quiet"]


def internal_names(folder: Path) -> list[str]:
    f = growth_frame()
    f["_var"] = f["person"].map({p: i % 3 for i, p in enumerate(f["person"].unique())})
    f = f.rename(columns={"person": "_person", "time": "_time", "y": "_y", "x": "_x0"})
    f.to_csv(folder / "model.csv", index=False)
    desc = description(predictors=["_x0", "_var"])
    desc["data"].update(person="_person", time="_time", outcome="_y")
    (folder / "model.yaml").write_text(yaml.safe_dump(desc))
    return ["reconcile", "model.yaml", "--json", "result.json", "--quiet"]


def report_with_names(outcome: str, predictor: str) -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        f = growth_frame().rename(columns={"y": outcome, "x": predictor})
        f.to_csv(folder / "model.csv", index=False)
        desc = description(predictors=[predictor])
        desc["data"]["outcome"] = outcome
        (folder / "model.yaml").write_text(yaml.safe_dump(desc))
        return ["report", "model.yaml", "--out", "report", "--quiet"]
    return build


def few_persons(folder: Path) -> list[str]:
    """Three persons, five waves: semopy logs that the sample covariance matrix is not positive definite."""
    write(folder, growth_frame(n=3, waves=(0.0, 1.0, 2.0, 3.0, 4.0)), description())
    return ["reconcile", "model.yaml", "--json", "result.json", "--quiet"]


def timing_of(ids: list[str]) -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        growth_frame(ids=ids).to_csv(folder / "model.csv", index=False)
        return ["timing", "model.csv", "--person", "person", "--time", "time", "--json", "timing.json"]
    return build


def simulate_into(files: dict[str, str]) -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        (folder / "study").mkdir()
        for name, content in files.items():
            (folder / "study" / name).write_text(content)
        return ["simulate", str(demo_files.GROWTH_DESCRIPTION), "--population", str(demo_files.GROWTH_POPULATION),
                "--replications", "2", "--workers", "1", "--out", "study", "--quiet"]
    return build


def simulate_with_population(text: str, at: str = "population.yaml") -> Callable[[Path], list[str]]:
    def build(folder: Path) -> list[str]:
        (folder / at).parent.mkdir(exist_ok=True)
        (folder / at).write_text(text)
        return ["simulate", str(demo_files.GROWTH_DESCRIPTION), "--population", at, "--replications", "2",
                "--workers", "1", "--out", "study", "--quiet"]
    return build


def rounding_onto_description(folder: Path) -> list[str]:
    write(folder, growth_frame(), description())
    return ["rounding", "model.yaml", "--json", "model.yaml"]


# --- checks of outputs for the cases that run to the end --------------------------------------------

def persons_used(expected: int) -> Callable[[Path, object], None]:
    def check(folder: Path, run) -> None:
        assert json.loads((folder / "result.json").read_text())["data"]["persons_used"] == expected
    return check


def keys_include(*keys: str) -> Callable[[Path, object], None]:
    def check(folder: Path, run) -> None:
        found = {q["key"] for q in json.loads((folder / "result.json").read_text())["quantities"]}
        assert set(keys) <= found, found
    return check


def report_escapes(raw: str, files: tuple[str, ...]) -> Callable[[Path, object], None]:
    def check(folder: Path, run) -> None:
        for name in files:
            assert raw not in (folder / "report" / name).read_text(encoding="utf-8"), name
    return check


def dot_escaped(folder: Path, run) -> None:
    dot = (folder / "report" / "path-diagram.dot").read_text(encoding="utf-8")
    assert 'x\\"];evil' in dot and not re.search(r'[^\\]"\];evil', dot), dot


def csv_neutralised(folder: Path, run) -> None:
    cells = [c for line in (folder / "report" / "correspondence.csv").read_text().splitlines() for c in line.split(",")]
    assert any(c.startswith("'=") or c.startswith("\"'=") for c in cells), cells[:20]
    assert not any(c.startswith("=") or c.startswith('"=') for c in cells)


def no_library_lines(folder: Path, run) -> None:
    assert "WARNING:root" not in run.stderr and "RuntimeWarning" not in run.stderr, run.stderr


def timing_persons(expected: int) -> Callable[[Path, object], None]:
    def check(folder: Path, run) -> None:
        assert json.loads((folder / "timing.json").read_text())["persons"] == expected
    return check


@dataclass(frozen=True)
class Case:
    build: Callable[[Path], list[str]]
    codes: tuple[int, ...]
    patterns: tuple[str, ...] = ()
    check: Callable[[Path, object], None] | None = None
    replaced: tuple[str, ...] = ()  # earlier outputs of sembridge that the run may replace


HTML = "<script>alert(1)</script>"
TEX = r"\input{/etc/passwd}"
FORMULA = "=HYPERLINK(\"http://x\")"

CASES: dict[str, Case] = {
    # 1. outputs: never onto an input, checked before fitting, only into folders sembridge wrote
    "json-onto-data": Case(onto("model.csv"), BAD, (r"input file", r"model\.csv")),
    "json-onto-description": Case(onto("model.yaml"), BAD, (r"input file",)),
    "json-onto-description-other-spelling": Case(onto("./sub/../model.yaml"), BAD, (r"input file",)),
    "json-onto-data-absolute-path": Case(lambda f: onto(str(f / "model.csv"))(f), BAD, (r"input file",)),
    "json-onto-data-through-symbolic-link": Case(linked("symbolic"), BAD, (r"input file",)),
    "json-onto-data-through-hard-link": Case(linked("hard"), BAD, (r"input file",)),
    "json-under-a-file": Case(onto("model.csv/out.json"), BAD, (r"(?i)is a file, not a folder",)),
    "json-onto-a-folder": Case(onto("sub"), BAD, (r"(?i)is a folder",)),
    "report-into-working-folder": Case(onto(".", "report", "--out"), BAD, (r"did not write",)),
    "report-onto-data-file": Case(onto("model.csv", "report", "--out"), BAD, (r"(?i)input file|not a folder",)),
    "draw-into-folder-with-user-files": Case(folder_with({"fit.csv": "a,b\n"}), BAD, (r"did not write", r"fit\.csv")),
    "draw-onto-file-changed-since": Case(folder_with({"path-diagram.dot": "mine"}, {"path-diagram.dot": "theirs"}),
                                         BAD, (r"changed since", r"path-diagram\.dot")),
    "draw-onto-unlisted-file": Case(folder_with({"path-diagram.svg": "mine"}, {}), BAD, (r"not written by sembridge",)),
    "draw-over-its-own-earlier-files": Case(folder_with({"path-diagram.dot": "old", "notes.txt": "keep"},
                                                        {"path-diagram.dot": "old"}), (0,),
                                            replaced=("out/path-diagram.dot", f"out/{MANIFEST}"),
                                            check=lambda f, r: (f / "out" / "path-diagram.dot").read_text()
                                            .startswith("digraph")),
    "report-keeps-edited-table-before-fitting": Case(folder_with({"fit.csv": "mine"}, {"fit.csv": "theirs"},
                                                             ("report", "model.yaml", "--out", "out", "--quiet")),
                                                 BAD, (r"out/fit\.csv", r"changed since")),
    "demo-keeps-edited-description": Case(demo_folder(edit=True, manifest=True), BAD, (r"sight_reading\.yaml",
                                                                                      r"changed since")),
    "demo-into-foreign-folder": Case(demo_folder(edit=True, manifest=False), BAD, (r"did not write",)),
    "timing-json-onto-data": Case(lambda f: timing_of(["a", "b", "c"])(f)[:-1] + ["model.csv"], BAD,
                                  (r"input file",)),
    "timing-figure-onto-data": Case(lambda f: timing_of(["a", "b", "c"])(f)[:-2] + ["--figure", "model.csv"], BAD,
                                    (r"input file",)),
    "rounding-json-onto-description": Case(rounding_onto_description, BAD, (r"input file",)),
    "population-inside-the-output-folder": Case(simulate_with_population(
        demo_files.GROWTH_POPULATION.read_text(), "study/summary.json"), BAD, (r"input file",)),
    "population-alias-bomb": Case(simulate_with_population(alias_bomb()), BAD, (r"population", r"aliases")),
    "population-duplicate-key": Case(simulate_with_population(demo_files.GROWTH_POPULATION.read_text() + "truth: {}\n"),
                                     BAD, (r"'truth'.*written twice",)),
    "simulate-into-foreign-folder": Case(simulate_into({"notes.md": "mine"}), BAD, (r"did not write",)),
    # 2. data read as written
    "ids-and-levels-read-as-text": Case(text_ids, OK, check=lambda f, r: (persons_used(20)(f, r),
                                                                        keys_include("effect.grp[1.50].slope")(f, r))),
    "internal-column-names-as-user-columns": Case(internal_names, OK, check=keys_include("effect._var.slope",
                                                                                         "effect._x0.intercept")),
    "timing-ids-read-as-text": Case(timing_of([f"1.{i}" for i in range(1, 21)]), (0,), check=timing_persons(20)),
    "outcome-not-numeric": Case(reconcile_with(changed(set_cell("y", 5, "twelve"))), BAD, (r"not numeric", "twelve")),
    "time-not-numeric": Case(reconcile_with(changed(set_cell("time", 3, "late"))), BAD, (r"not numeric", "late")),
    "time-as-date": Case(reconcile_with(changed(set_cell("time", 3, "2020-01-01"))), BAD, (r"not numeric",)),
    "person-id-missing": Case(reconcile_with(changed(set_cell("person", 2, np.nan))), BAD, (r"(?i)missing",)),
    "outcome-1e300": Case(reconcile_with(changed(set_cell("y", 4, 1e300))), BAD, (r"too large", r"rescale")),
    "outcome-overflows-to-infinity": Case(reconcile_with(changed(set_cell("y", 4, "1e400"))), BAD, (r"infinite",)),
    "time-1e300": Case(reconcile_with(changed(lambda f: f.assign(time=f["time"] * 1e300))), BAD, (r"too large",)),
    "all-persons-identical": Case(reconcile_with(changed(lambda f: f.assign(y=f["time"] * 2.0 + (f["time"] == 1)))),
                                  BAD, (r"identical", r"persons")),
    "timestamps-differing-in-last-digits": Case(reconcile_with(changed(lambda f: f.assign(time=1.6e9 + f["time"]))),
                                                BAD, (r"time_origin",)),
    "predictor-constant": Case(reconcile_with(changed(lambda f: f.assign(x=1.0)), lambda: description(predictors=["x"])),
                               BAD, (r"constant",)),
    "reference-level-absent": Case(reconcile_with(desc=lambda: description(predictors=["x"], categorical=["x"],
                                                                           reference_levels={"x": "zzz"})),
                                   BAD, (r"reference level", r"zzz")),
    "data-binary-garbage": Case(lambda f: (write(f, None, description()), (f / "model.csv").write_bytes(
        bytes(range(256)) * 8), ["reconcile", "model.yaml"])[-1], BAD, (r"model\.csv",)),
    "data-unsupported-type": Case(reconcile_with(desc=lambda: description(data="model.xlsx")), BAD, (r"(?i)not found|"
                                                                                                   r"unsupported",)),
    "data-path-is-a-folder": Case(lambda f: (write(f, None, description(data="sub")), (f / "sub").mkdir(),
                                             ["reconcile", "model.yaml"])[-1], BAD, (r"not a file",)),
    "data-path-link-loop": Case(loop("data"), BAD, (r"(?i)loop",)),
    "data-path-with-nul": Case(reconcile_with(desc=lambda: description(data="a\x00b.csv")), BAD, (r"data\.path",)),
    # 3. bounded input
    "description-link-loop": Case(loop("description"), BAD, (r"(?i)symbolic links|loop",)),
    "description-is-a-folder": Case(lambda f: ["reconcile", "."], BAD, (r"(?i)folder",)),
    "description-not-utf8": Case(lambda f: ((f / "model.yaml").write_bytes(b"data: \xff\xfe\n"),
                                            ["reconcile", "model.yaml"])[-1], BAD, (r"UTF-8",)),
    "description-too-large": Case(yaml_text(BASE_YAML + "# " + "x" * 1_100_000 + "\n"), BAD, (r"larger than",)),
    "alias-bomb": Case(yaml_text(alias_bomb()), BAD, (r"aliases are expanded",)),
    "alias-bomb-in-compile": Case(yaml_text(alias_bomb(), "compile"), BAD, (r"aliases are expanded",)),
    "recursive-alias": Case(yaml_text(BASE_YAML + "loop: &l [1, *l]\n"), BAD, (r"(?i)alias refers|recursive",)),
    "nesting-too-deep": Case(yaml_text(deep_nesting()), BAD, (r"nested more than",)),
    "duplicate-top-level-key": Case(yaml_text(BASE_YAML + "model:\n  shape: quadratic\n"), BAD,
                                    (r"'model'.*written twice", r"line \d+")),
    "duplicate-nested-key": Case(yaml_text(BASE_YAML.replace("  outcome: y\n", "  outcome: y\n  outcome: x\n")), BAD,
                                 (r"'outcome' \(line 7\): written twice \(first at line 6\)",)),
    "typo-key-suggestion": Case(yaml_text(valid_yaml(model__predictor=["x"])), BAD, (r"did you mean 'predictors'",)),
    "typo-word-suggestion": Case(yaml_text(valid_yaml(model__shape="linaer")), BAD, (r"did you mean 'linear'",)),
    "huge-value-cut-short": Case(yaml_text(valid_yaml(model__shape="q" * 100_000)), BAD, (r"model\.shape", r"\.\.\.")),
    "huge-key-cut-short": Case(yaml_text(valid_yaml(model__predictor=1) .replace("predictor", "k" * 50_000)), BAD,
                               (r"(?i)yaml|\.\.\.",)),
    "huge-integer": Case(yaml_text(valid_yaml() + "forms:\n  sem:\n    time_origin: 1" + "0" * 400 + "\n"), BAD,
                         (r"time_origin", r"finite number")),
    "integer-beyond-digit-limit": Case(yaml_text(valid_yaml() + "forms:\n  sem:\n    time_origin: 1" + "0" * 5000
                                                 + "\n"), BAD, (r"(?i)cannot be read|finite number",)),
    "time-scale-underflow": Case(yaml_text(valid_yaml(forms__sem={"time_scale": 1e-300})), BAD,
                                 (r"time_scale", r"underflow")),
    "time-scale-overflow": Case(yaml_text(valid_yaml(forms__mixed={"time_scale": 1e300})), BAD, (r"time_scale",)),
    "time-scale-negative": Case(yaml_text(valid_yaml(forms__mixed={"time_scale": -1})), BAD, (r"time_scale",)),
    "empty-description": Case(yaml_text(""), BAD, (r"(?i)empty|mapping",)),
    "description-is-a-list": Case(yaml_text("- a\n- b\n"), BAD, (r"mapping",)),
    "wrong-type-random": Case(yaml_text(valid_yaml(model__random="intercept")), BAD, (r"model\.random",)),
    "wrong-type-waves": Case(yaml_text(valid_yaml(estimation__waves="0,1,2")), BAD, (r"estimation\.waves",)),
    "wrong-type-person": Case(yaml_text(BASE_YAML.replace("person: person", "person: 123")), BAD, (r"data\.person",)),
    "boolean-as-number": Case(yaml_text(valid_yaml(model__time_origin=True)), BAD, (r"time_origin",)),
    "date-as-number": Case(yaml_text(BASE_YAML + "estimation:\n  waves: [2020-01-01, 2021-01-01]\n"), BAD,
                           (r"estimation\.waves",)),
    "unsafe-python-tag": Case(yaml_text("data: !!python/object/apply:os.system ['touch PWNED']\n"), BAD,
                              (r"(?i)yaml|tag",)),
    "malformed-yaml": Case(yaml_text("data:\n  path: a\n   person: b\n"), BAD, (r"not valid YAML", r"line 3")),
    "tab-indented-yaml": Case(yaml_text("data:\n\tpath: a\n"), BAD, (r"not valid YAML",)),
    # 4. library messages become findings, never raw lines
    "library-warnings-captured": Case(few_persons, OK + BAD, check=no_library_lines),
    # 5. injection through names into the report: escaped in every format, CSV cells neutralised
    "html-in-outcome-name": Case(report_with_names(HTML, "x"), OK, check=report_escapes(HTML, ("report.html",))),
    "latex-in-predictor-name": Case(report_with_names("y", TEX), OK,
                                    check=report_escapes(TEX, ("correspondence.tex", "mixed-model.tex"))),
    "formula-in-predictor-name": Case(report_with_names("y", FORMULA), OK, check=csv_neutralised),
    "dot-quote-in-predictor-name": Case(report_with_names("y", 'x"];evil[label="'), OK,
                                        check=dot_escaped),
}


def snapshot(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file() and not p.is_symlink()}


@pytest.mark.parametrize("name", list(CASES))
def test_adversarial_case(name, tmp_path):
    case = CASES[name]
    args = case.build(tmp_path)
    before = snapshot(tmp_path)
    run = run_cli(args, tmp_path)
    assert "Traceback" not in run.stderr + run.stdout, run.stderr
    assert run.code in case.codes, f"exit code {run.code}, stderr: {run.stderr[:500]!r}"
    assert len(run.error_lines) <= 1, run.stderr[:2000]
    if run.code == 2:
        assert len(run.error_lines) == 1 and len(run.error_lines[0]) <= 400, run.stderr[:2000]
        for pattern in case.patterns:
            assert re.search(pattern, run.error_lines[0]), f"{pattern!r} not in {run.error_lines[0]!r}"
    after = snapshot(tmp_path)
    for file, digest in before.items():
        if file in case.replaced:
            continue
        assert after.get(file) == digest, f"input {file} was changed or removed"
    if case.check is not None and run.code != 2:
        case.check(tmp_path, run)


def test_there_are_at_least_sixty_named_cases():
    """The issue asks for at least 60 named adversarial cases (common practice: a table, one row per case)."""
    assert len(CASES) >= 60

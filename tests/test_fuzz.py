"""Property-based fuzzing of the command line with generated, mutated and malformed inputs.

Hypothesis generates model descriptions (a valid one with keys dropped, values replaced by values of
every YAML type, unknown keys added, or its text damaged) and small data files (odd ids, text in number
columns, empty cells, huge and tiny numbers, column names like the tool's internal ones, damaged bytes).
Each case runs `sembridge` in this process and must hold the contract of docs/commands.md:

- the exit code is one of 0, 2, 3, 4 (1 would be a bug);
- no traceback; at most one line on standard error, exactly one for exit code 2;
- no input file changed (SHA-256 before and after);
- outputs complete or absent: a JSON file parses, a figure folder's manifest lists exactly its files.

Profiles (environment variable `SEMBRIDGE_FUZZ`): `short` (default: a few hundred cases in about a
minute, derandomised so every run tries the same cases) and `long` (thousands of cases, random each run):

    SEMBRIDGE_FUZZ=long python -m pytest tests/test_fuzz.py -q
"""
from __future__ import annotations

import hashlib
import json
import os
import re
import tempfile
from pathlib import Path

import yaml
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from conftest import run_cli

from bridge.outputs import MANIFEST, read_manifest

settings.register_profile("short", max_examples=200, derandomize=True, deadline=None, database=None,
                          suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("long", max_examples=2000, deadline=None, database=None,
                          suppress_health_check=[HealthCheck.too_slow])
PROFILE = settings.get_profile(os.environ.get("SEMBRIDGE_FUZZ", "short"))


def scaled(fraction: float) -> settings:
    """The chosen profile with a share of its examples (the fitting commands are slower)."""
    return settings(PROFILE, max_examples=max(5, int(PROFILE.max_examples * fraction)))


CONTRACT = {0, 2, 3, 4}

# --- generated values -------------------------------------------------------------------------------

TEXT = st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=12)
NAMES = st.sampled_from(["person", "time", "y", "x", "_person", "_time", "_y", "_var", "_x0", "1.1", "1.10",
                         "=cmd", "<b>", "a b", ""])
SCALARS = st.one_of(st.none(), st.booleans(), st.integers(-10**30, 10**30), st.integers(-3, 3),
                    st.floats(allow_nan=True, allow_infinity=True), TEXT, NAMES,
                    st.sampled_from(["linear", "quadratic", "long", "wide", "ml", "reml", "growth", "cross-lagged",
                                     "per-wave", "complete-cases", 1e-300, 1e300, 10**400]))
VALUES = st.recursive(SCALARS, lambda inner: st.one_of(st.lists(inner, max_size=4),
                                                       st.dictionaries(NAMES, inner, max_size=4)), max_leaves=8)
KEYS = ["data.path", "data.layout", "data.person", "data.time", "data.outcome", "data.columns", "data.outcomes",
        "model.kind", "model.shape", "model.random", "model.predictors", "model.categorical", "model.residuals",
        "model.time_origin", "model.reference_levels", "model.variant", "model.paths", "estimation.method",
        "estimation.missing", "estimation.waves", "forms.sem.time_scale", "forms.mixed.time_origin",
        "forms.sem.missing", "model.colour", "extra"]


def valid_description() -> dict:
    return {"data": {"path": "model.csv", "layout": "long", "person": "person", "time": "time", "outcome": "y"},
            "model": {"kind": "growth", "shape": "linear", "random": ["intercept", "slope"], "predictors": ["x"]},
            "estimation": {"method": "ml"}}


def set_key(tree: dict, key: str, value) -> None:
    *parents, last = key.split(".")
    node = tree
    for part in parents:
        if not isinstance(node.get(part), dict):
            node[part] = {}
        node = node[part]
    node[last] = value


def drop_key(tree: dict, key: str) -> None:
    *parents, last = key.split(".")
    node = tree
    for part in parents:
        node = node.get(part) if isinstance(node, dict) else None
    if isinstance(node, dict):
        node.pop(last, None)


@st.composite
def descriptions(draw) -> str:
    """A description's text: the valid one with some keys replaced or dropped, sometimes damaged as text."""
    tree = valid_description()
    for key, value in draw(st.lists(st.tuples(st.sampled_from(KEYS), VALUES), max_size=3)):
        set_key(tree, key, value)
    for key in draw(st.lists(st.sampled_from(KEYS), max_size=2)):
        drop_key(tree, key)
    text = yaml.safe_dump(tree, sort_keys=False, allow_unicode=True)
    damage = draw(st.sampled_from(["none", "none", "insert", "delete", "repeat-line", "alias"]))
    if damage == "insert":
        at = draw(st.integers(0, len(text)))
        text = text[:at] + draw(st.sampled_from([":", "- ", "&a ", "*a", "\t", "{", "]", "!!python/none ", "\n  "
                                                 "%", "? ", "'"])) + text[at:]
    elif damage == "delete":
        at = draw(st.integers(0, len(text)))
        text = text[:at] + text[at + draw(st.integers(1, 20)):]
    elif damage == "repeat-line":
        lines = text.splitlines(keepends=True)
        at = draw(st.integers(0, len(lines) - 1))
        text = "".join(lines[:at + 1] + [lines[at]] + lines[at + 1:])
    elif damage == "alias":
        text += "bomb: &b [" + ", ".join(["*b"] * draw(st.integers(1, 3))) + "]\n"
    return text


CELLS = st.one_of(st.floats(-1e6, 1e6, allow_nan=False).map(lambda v: f"{v:.6g}"), st.integers(-100, 100).map(str),
                  st.sampled_from(["", "NA", "nan", "inf", "-inf", "1e300", "1e-300", "1e400", "=1+1", "x", "1.10",
                                   "\"", "0x10", " 3 ", "1,5", "TRUE"]))


ID_CHOICES = ["p1", "p2", "1.1", "1.10", "01", "1", "a,b", "", "x y", "3", "p3", "p4", "1.100", "=1", "p5"]


@st.composite
def data_files(draw, fit: bool = False) -> bytes:
    """A small long-layout CSV: generated ids, times, outcomes and a predictor, some cells replaced.

    With `fit`, the file is mostly usable (distinct ids, at least 4 persons and 3 waves, fewer damaged
    cells), so that most cases reach the fitting stages.
    """
    ids = draw(st.lists(st.sampled_from(ID_CHOICES), min_size=4 if fit else 0, max_size=8, unique=fit))
    waves = draw(st.lists(st.sampled_from([0, 1, 2, 3, 4, 5, 1.5] + ([] if fit else [1e9])),
                          min_size=3 if fit else 1, max_size=5, unique=True))
    columns = draw(st.permutations(["person", "time", "y", "x"]))
    names = {c: c if fit else draw(st.sampled_from([c, c, c, "_" + c, "_var", "_y", "_person"])) for c in columns}
    rows = [",".join(names[c] for c in columns)]
    damage_one_in = 40 if fit else 10
    for i, pid in enumerate(ids):
        x = draw(st.sampled_from(["0.5", "1", "a", "b", ""]))
        for t in waves:
            noise = draw(st.floats(-2, 2, allow_nan=False))
            cells = {"person": pid, "time": str(t), "y": f"{(i + 1) * 1.7 + t * (i % 3 + 1) + noise:.4g}", "x": x}
            if draw(st.integers(0, damage_one_in - 1)) == 0:
                cells[draw(st.sampled_from(columns))] = draw(CELLS)
            rows.append(",".join(f'"{cells[c]}"' if "," in cells[c] else cells[c] for c in columns))
    data = ("\n".join(rows) + "\n").encode("utf-8")
    if draw(st.integers(0, damage_one_in - 1)) == 0:   # damaged bytes
        at = draw(st.integers(0, len(data)))
        data = data[:at] + draw(st.binary(min_size=1, max_size=8)) + data[at:]
    return data


# --- the contract -----------------------------------------------------------------------------------

def hashes(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in folder.rglob("*") if p.is_file()}


def assert_contract(folder: Path, args: list[str], outputs: tuple[str, ...] = ()) -> None:
    before = hashes(folder)
    run = run_cli(args, folder)
    event(f"exit code {run.code}")
    assert run.code in CONTRACT, f"exit {run.code}: {run.stderr[:500]!r}"
    assert "Traceback" not in run.stdout + run.stderr, run.stderr[:2000]
    lines = run.error_lines
    assert len(lines) == (1 if run.code == 2 else len(lines)) and len(lines) <= 1, run.stderr[:2000]
    assert all(len(line) <= 400 for line in lines)
    after = hashes(folder)
    for name, digest in before.items():
        assert after.get(name) == digest, f"input {name} changed"
    for name in outputs:
        assert_complete_or_absent(folder / name)


def assert_complete_or_absent(path: Path) -> None:
    if not path.exists():
        return
    if path.is_dir():
        listed = read_manifest(path)
        assert listed is not None, f"{path} has no manifest"
        present = {p.name for p in path.iterdir()} - {MANIFEST}
        assert present == set(listed), (present, listed)
        for name, accepted in listed.items():
            assert hashlib.sha256((path / name).read_bytes()).hexdigest() in accepted
        return
    json.loads(path.read_text(encoding="utf-8"))


def case_folder(description: str, data: bytes | None) -> tempfile.TemporaryDirectory:
    folder = tempfile.TemporaryDirectory()
    root = Path(folder.name)
    (root / "model.yaml").write_text(description, encoding="utf-8")
    if data is not None:
        (root / "model.csv").write_bytes(data)
    return folder


VALID_DATA = ("person,time,y,x\n" + "".join(f"p{i},{t},{i * 1.3 + t * (1 + i % 3) + (i * t) % 2},{i % 2}\n"
                                             for i in range(8) for t in range(4))).encode()


@scaled(0.6)
@given(descriptions())
def test_generated_descriptions_hold_the_contract(description):
    with case_folder(description, VALID_DATA) as folder:
        assert_contract(Path(folder), ["compile", "model.yaml"])


@scaled(0.6)
@given(data_files(), st.sampled_from(["linear", "quadratic"]), st.booleans())
def test_generated_data_files_hold_the_contract(data, shape, categorical):
    tree = valid_description()
    tree["model"].update(shape=shape, categorical=["x"] if categorical else [])
    header = data.split(b"\n", 1)[0].decode("utf-8", "replace").split(",")
    for role in ("person", "time", "y", "x"):   # follow renamed columns when the header kept them apart
        renamed = [h for h in header if h.lstrip("_") == role]
        if len(renamed) == 1:
            set_key(tree, {"person": "data.person", "time": "data.time", "y": "data.outcome"}.get(role, "x"),
                    renamed[0])
    if "x" in tree:
        tree["model"]["predictors"] = [tree.pop("x")]
        tree["model"]["categorical"] = tree["model"]["predictors"] if categorical else []
    with case_folder(yaml.safe_dump(tree), data) as folder:
        assert_contract(Path(folder), ["compile", "model.yaml"])


@scaled(0.15)
@given(descriptions())
def test_figure_folders_are_complete_or_absent(description):
    with case_folder(description, VALID_DATA) as folder:
        assert_contract(Path(folder), ["draw", "model.yaml", "--structure-only", "--out", "figure"], ("figure",))


@scaled(0.08)
@given(data_files(fit=True))
def test_fitted_results_hold_the_contract(data):
    tree = valid_description()
    tree["model"]["predictors"] = []
    with case_folder(yaml.safe_dump(tree), data) as folder:
        assert_contract(Path(folder), ["reconcile", "model.yaml", "--json", "out.json", "--quiet"], ("out.json",))


def test_profiles_are_documented():
    """The profile names in this module's docstring are the registered ones."""
    assert set(re.findall(r"`(short|long)`", __doc__)) == {"short", "long"}
    assert PROFILE.max_examples in (200, 2000)

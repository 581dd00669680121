"""Read a YAML model description into a :class:`Description`.

Every problem is collected with its key path and line number, then raised once
as a single-line :class:`DescriptionError`. YAML is read with the safe loader:
nothing in a description is ever evaluated as code.
"""
from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import yaml

from ..errors import DescriptionError
from .description import DataSection, Description, EstimationSection, FormSettings, ModelSection
from .vocabulary import Kind, Layout, Method, Missing, Paths, Residuals, Shape, Term, Variant, terms_of

_KEYS = {
    "": {"data", "model", "estimation", "forms"},
    "data": {"path", "layout", "person", "time", "outcome", "outcomes", "columns"},
    "model": {"kind", "shape", "random", "predictors", "categorical", "residuals", "time_origin",
              "reference_levels", "variant", "paths"},
    "estimation": {"method", "missing", "waves"},
    "forms": {"sem", "mixed"},
    "forms.sem": {"missing", "time_origin", "time_scale"},
    "forms.mixed": {"missing", "time_origin", "time_scale"},
}
_MISSING = object()

#: Keys that belong to one model kind only: a description of another kind that sets them is refused.
_KIND_OF_KEY = {
    "data.outcome": Kind.GROWTH, "model.shape": Kind.GROWTH, "model.random": Kind.GROWTH,
    "model.predictors": Kind.GROWTH, "model.categorical": Kind.GROWTH, "model.residuals": Kind.GROWTH,
    "model.time_origin": Kind.GROWTH, "model.reference_levels": Kind.GROWTH, "forms": Kind.GROWTH,
    "data.outcomes": Kind.CROSS_LAGGED, "model.variant": Kind.CROSS_LAGGED, "model.paths": Kind.CROSS_LAGGED,
}
#: Values that belong to one model kind only.
_KIND_OF_VALUE = {("estimation.method", Method.REML.value): Kind.GROWTH}


class _Reader:
    """Walks the parsed YAML, remembering where each key stood."""

    def __init__(self, label: str, tree: Any, lines: dict[str, int]):
        self.label, self.tree, self.lines, self.problems = label, tree, lines, []

    def problem(self, key: str, expected: str, found: Any) -> None:
        where = f" (line {self.lines[key]})" if key in self.lines else ""
        shown = "nothing" if found is _MISSING else repr(found)
        self.problems.append(f"{key or 'the file'}{where}: expected {expected}, found {shown}")

    def get(self, key: str, default: Any = _MISSING) -> Any:
        node: Any = self.tree
        for part in key.split("."):
            if not isinstance(node, dict) or part not in node:
                return default
            node = node[part]
        return node

    def check_keys(self, section: str) -> None:
        node = self.get(section) if section else self.tree
        if node is _MISSING:
            return
        if not isinstance(node, dict):
            self.problem(section, "a mapping of keys", node)
            return
        for key in node:
            if key not in _KEYS[section]:
                full = f"{section}.{key}" if section else str(key)
                self.problem(full, "one of " + ", ".join(sorted(_KEYS[section])), key)

    def text(self, key: str, required: bool = True) -> str | None:
        value = self.get(key)
        if value is _MISSING:
            if required:
                self.problem(key, "a column name", _MISSING)
            return None
        if not isinstance(value, str) or not value.strip():
            self.problem(key, "a non-empty text", value)
            return None
        return value

    def word(self, key: str, vocabulary: type, default: Any) -> Any:
        value = self.get(key, default)
        try:
            return vocabulary(value)
        except ValueError:
            self.problem(key, "one of " + ", ".join(vocabulary.words()), value)
            return default

    def number(self, key: str, value: Any) -> float | None:
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            self.problem(key, "a finite number", value)
            return None
        return float(value)

    def text_list(self, key: str) -> list[str]:
        value = self.get(key, [])
        if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
            self.problem(key, "a list of names", value)
            return []
        if len(set(value)) != len(value):
            self.problem(key, "names without repeats", value)
        return value


def _line_map(node: yaml.Node, prefix: str = "", lines: dict[str, int] | None = None) -> dict[str, int]:
    lines = {} if lines is None else lines
    if isinstance(node, yaml.MappingNode):
        for key_node, value_node in node.value:
            key = f"{prefix}.{key_node.value}" if prefix else str(key_node.value)
            lines[key] = key_node.start_mark.line + 1
            _line_map(value_node, key, lines)
    return lines


def _parse(path: Path) -> tuple[Any, dict[str, int]]:
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise DescriptionError(f"{path}: description file not found") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise DescriptionError(f"{path}: cannot read the description ({exc.__class__.__name__})") from exc
    try:
        tree = yaml.safe_load(text)
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" at line {mark.line + 1}" if mark else ""
        problem = getattr(exc, "problem", None) or "malformed YAML"
        raise DescriptionError(f"{path.name}: not valid YAML{where}: {problem}") from exc
    if not isinstance(tree, dict):
        raise DescriptionError(f"{path.name}: expected a mapping with a 'data' section, found {type(tree).__name__}")
    return tree, _line_map(root) if root is not None else {}


def _check_kind(r: _Reader) -> None:
    """Refuse every key or value that the chosen model kind does not use, naming the kind that does."""
    kind = r.get("model.kind", Kind.GROWTH.value)
    if kind not in Kind.words():
        return  # reported by the model section
    for key, owner in _KIND_OF_KEY.items():
        value = r.get(key)
        if value is not _MISSING and owner.value != kind:
            hint = (" (add 'kind: cross-lagged' under model for several outcomes)"
                    if owner is Kind.CROSS_LAGGED else "")
            r.problem(key, f"no '{key}' for model.kind {kind}: it is used by {owner.value} models{hint}", value)
    for (key, word), owner in _KIND_OF_VALUE.items():
        if r.get(key) == word and owner.value != kind:
            r.problem(key, f"another value for model.kind {kind}: '{word}' is used by {owner.value} models", word)
    if kind == Kind.CROSS_LAGGED.value and r.get("estimation.waves") is not _MISSING \
            and r.get("data.layout") == Layout.WIDE.value:
        r.problem("estimation.waves", "no waves for a wide cross-lagged layout: its column map gives the waves",
                  r.get("estimation.waves"))


def _data_section(r: _Reader, base: Path) -> DataSection | None:
    if r.get("data") is _MISSING:
        r.problem("data", "a 'data' section", _MISSING)
        return None
    path, person = r.text("data.path"), r.text("data.person")
    layout = r.word("data.layout", Layout, Layout.LONG.value)
    time = r.text("data.time", required=layout is Layout.LONG)
    panel = r.get("model.kind") == Kind.CROSS_LAGGED.value
    if panel:
        outcomes = _outcomes(r) if layout is Layout.LONG else ()
        panel_columns = _panel_columns(r) if layout is Layout.WIDE else ()
        outcome, columns = None, ()
    else:
        outcomes, panel_columns = (), ()
        outcome = r.text("data.outcome", required=layout is Layout.LONG)
        columns = _wide_columns(r) if layout is Layout.WIDE else ()
    if None in (path, person):
        return None
    return DataSection(path=(base / path).resolve(), layout=layout, person=person, time=time, outcome=outcome,
                       columns=columns, outcomes=outcomes, panel_columns=panel_columns)


def _outcomes(r: _Reader) -> tuple[str, ...]:
    value = r.get("data.outcomes")
    if not isinstance(value, list) or len(value) < 2 or not all(isinstance(v, str) and v for v in value) \
            or len(set(value)) != len(value):
        r.problem("data.outcomes", "a list of at least two different outcome columns for a cross-lagged model", value)
        return ()
    return tuple(value)


def _panel_columns(r: _Reader) -> tuple[tuple[str, tuple[tuple[str, float], ...]], ...]:
    value = r.get("data.columns")
    if not isinstance(value, dict) or len(value) < 2 or not all(isinstance(v, dict) for v in value.values()):
        r.problem("data.columns", "a mapping of at least two outcomes, each to its columns and their waves", value)
        return ()
    out = []
    for name, columns in value.items():
        pairs = [(str(col), r.number(f"data.columns.{name}.{col}", t)) for col, t in columns.items()]
        out.append((str(name), tuple((c, t) for c, t in pairs if t is not None)))
    return tuple(out)


def _wide_columns(r: _Reader) -> tuple[tuple[str, float], ...]:
    value = r.get("data.columns")
    if not isinstance(value, dict) or len(value) < 2:
        r.problem("data.columns", "a mapping of at least two outcome columns to their time values", value)
        return ()
    pairs = [(str(col), r.number(f"data.columns.{col}", t)) for col, t in value.items()]
    times = [t for _, t in pairs if t is not None]
    if len(set(times)) != len(times):
        r.problem("data.columns", "a different time value for every column", value)
    return tuple((c, t) for c, t in pairs if t is not None)


def _model_section(r: _Reader) -> ModelSection:
    kind = r.word("model.kind", Kind, Kind.GROWTH.value)
    shape = r.word("model.shape", Shape, Shape.LINEAR.value)
    allowed = terms_of(shape)
    random_words = r.text_list("model.random") if r.get("model.random") is not _MISSING else ["intercept", "slope"]
    random = []
    for word in random_words:
        if word not in {t.value for t in allowed}:
            r.problem("model.random", f"terms of a {shape.value} shape ({', '.join(t.value for t in allowed)})", word)
        else:
            random.append(Term(word))
    if not random_words:
        r.problem("model.random", "at least one growth term that varies across persons", random_words)
    predictors = r.text_list("model.predictors")
    categorical = r.text_list("model.categorical")
    for name in categorical:
        if name not in predictors:
            r.problem("model.categorical", "predictors listed in model.predictors", name)
    origin = r.number("model.time_origin", r.get("model.time_origin", 0.0))
    references = _reference_levels(r, predictors)
    variant = r.word("model.variant", Variant, Variant.CLPM.value)
    paths = r.word("model.paths", Paths, Paths.TIME_INVARIANT.value)
    if paths is Paths.WAVE_SPECIFIC and variant in (Variant.DYNAMIC_PANEL, Variant.RI_CLPM):
        r.problem("model.paths", f"time-invariant for the {variant.value} variant (its long form, a mixed model "
                  "with one residual variance, has no wave-specific counterpart; wave-specific paths are "
                  "available for clpm)", paths.value)
    return ModelSection(kind=kind, shape=shape, variant=variant, paths=paths, random=tuple(sorted(random, key=lambda t: t.power)),
                        predictors=tuple(predictors), categorical=tuple(categorical), residuals=r.word("model.residuals", Residuals, "equal"),
                        time_origin=origin or 0.0, reference_levels=references)


def _reference_levels(r: _Reader, predictors: list[str]) -> tuple[tuple[str, str], ...]:
    value = r.get("model.reference_levels", {})
    if not isinstance(value, dict):
        r.problem("model.reference_levels", "a mapping of predictor to its reference level", value)
        return ()
    for name in value:
        if name not in predictors:
            r.problem(f"model.reference_levels.{name}", "a predictor listed in model.predictors", name)
    return tuple((str(k), str(v)) for k, v in value.items() if k in predictors)


def _estimation_section(r: _Reader) -> EstimationSection:
    waves_value = r.get("estimation.waves", None)
    waves = None
    if waves_value is not None:
        numbers = [r.number("estimation.waves", w) for w in waves_value] if isinstance(waves_value, list) else []
        if len(numbers) < 2 or None in numbers or sorted(set(numbers)) != numbers:
            r.problem("estimation.waves", "an increasing list of at least two time values", waves_value)
        else:
            waves = tuple(numbers)
    return EstimationSection(method=r.word("estimation.method", Method, "ml"),
                             missing=r.word("estimation.missing", Missing, "full-information"), waves=waves)


def _form(r: _Reader, name: str) -> FormSettings:
    key = f"forms.{name}"
    missing = r.get(f"{key}.missing", None)
    origin, scale = r.get(f"{key}.time_origin", None), r.get(f"{key}.time_scale", None)
    if scale is not None and r.number(f"{key}.time_scale", scale) is not None and scale <= 0:
        r.problem(f"{key}.time_scale", "a positive number", scale)
    return FormSettings(missing=None if missing is None else r.word(f"{key}.missing", Missing, None),
                        time_origin=None if origin is None else r.number(f"{key}.time_origin", origin),
                        time_scale=None if scale is None else r.number(f"{key}.time_scale", scale))


def load(path: str | Path) -> Description:
    """Read and validate a YAML model description; raise one DescriptionError listing every problem."""
    path = Path(path)
    tree, lines = _parse(path)
    reader = _Reader(path.name, tree, lines)
    for section in _KEYS:
        reader.check_keys(section)
    _check_kind(reader)
    data = _data_section(reader, path.parent)
    model = _model_section(reader)
    estimation = _estimation_section(reader)
    sem_form, mixed_form = _form(reader, "sem"), _form(reader, "mixed")
    if reader.problems or data is None:  # every path that leaves data unset has recorded a problem
        raise DescriptionError(f"{path.name}: " + "; ".join(reader.problems))
    return Description(data=data, model=model, estimation=estimation, sem_form=sem_form, mixed_form=mixed_form,
                       source=path.resolve())

"""The population file of a Monte Carlo study: true values for a description's quantities and the design.

```yaml
design:
  persons: 300                # persons per replication
  waves: [0, 1, 2, 3, 4]      # planned times; they become the description's estimation.waves
  missing_rate: 0.0           # chance that an occasion is absent (each person keeps one)
  jitter: 0.0                 # each time is its wave plus a uniform offset in [-jitter, +jitter]
  predictors:                 # how each of the description's predictors is drawn
    format: binary:group,private   # or: normal
truth:
  mean.intercept: 50
  mean.slope: 2
  var.intercept: 25
  var.slope: 1
  cov.intercept.slope: 1.5    # covariances not given are 0
  var.residual: 4
  effect.format.slope: 0.5    # effects not given are 0; binary: the second level against the first
```
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

from ..errors import DescriptionError
from ..simulate.growth import GrowthTruth
from ..spec import Description, Layout
from ..spec.reading import read_yaml
from ..spec.vocabulary import Kind

_DESIGN = {"persons", "waves", "missing_rate", "jitter", "predictors"}


@dataclass(frozen=True)
class Population:
    """A checked population: the generating truth and the true value of every reported quantity."""

    source: str
    truth: GrowthTruth
    values: dict[str, float]        # quantity key as the reconciler reports it -> true value

    def true_value(self, key: str) -> float | None:
        """The true value of a reported quantity (a per-wave residual variance is the residual variance)."""
        if key.startswith("var.residual."):
            key = "var.residual"
        return self.values.get(key)


class _Problems:
    def __init__(self, label: str):
        self.label, self.items = label, []

    def add(self, key: str, message: str) -> None:
        self.items.append(f"'{key}': {message}")

    def number(self, key: str, value, minimum: float | None = None) -> float:
        ok = isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)
        if not ok or (minimum is not None and value < minimum):
            self.add(key, f"expected a finite number{'' if minimum is None else f' >= {minimum:g}'}, "
                          f"found {value!r}")
            return float("nan")
        return float(value)

    def raise_any(self) -> None:
        if self.items:
            raise DescriptionError(f"{self.label}: " + "; ".join(self.items))


def _read(path: Path) -> dict:
    if not path.is_file():
        raise DescriptionError(f"{path.name}: population file not found at {path}")
    tree, _, duplicates = read_yaml(path, "population")   # bounded, like a description
    if duplicates:
        raise DescriptionError(f"{path.name}: " + "; ".join(duplicates))
    if not isinstance(tree, dict) or set(tree) != {"design", "truth"} or not all(
            isinstance(tree[k], dict) for k in tree):
        raise DescriptionError(f"{path.name}: expected two mappings, 'design' and 'truth'")
    return tree


def _predictor_key(desc: Description, name: str, spec: str, problems: _Problems) -> str:
    """The reconciler's name of a predictor's effect column: `name`, or `name[level1]` for a binary one."""
    if spec == "normal":
        return name
    levels = [v.strip() for v in str(spec).removeprefix("binary:").split(",")]
    if not str(spec).startswith("binary:") or len(levels) != 2:
        problems.add(f"design.predictors.{name}", f"expected 'normal' or 'binary:<level0>,<level1>', found {spec!r}")
        return name
    reference = dict(desc.model.reference_levels).get(name, min(levels))
    if reference != levels[0]:
        problems.add(f"design.predictors.{name}", f"the description's reference level of '{name}' is "
                                                  f"{reference!r}; list it first")
    return f"{name}[{levels[1]}]"


def _expected_keys(desc: Description, effect_names: dict[str, str]) -> tuple[list[str], list[str]]:
    terms = [t.value for t in desc.model.terms]
    random = [t.value for t in desc.model.random]
    required = [f"mean.{t}" for t in terms] + [f"var.{t}" for t in random] + ["var.residual"]
    optional = [f"cov.{a}.{b}" for i, a in enumerate(random) for b in random[i + 1:]]
    optional += [f"effect.{p}.{t}" for p in effect_names for t in terms]
    return required, optional


def _truth_values(desc, given: dict, effect_names: dict[str, str], problems: _Problems) -> dict[str, float]:
    required, optional = _expected_keys(desc, effect_names)
    values = {}
    for key in given:
        a = key.split(".")
        swapped = f"cov.{a[2]}.{a[1]}" if len(a) == 3 and a[0] == "cov" else key
        if key not in required + optional and swapped not in optional:
            problems.add(f"truth.{key}", f"not a quantity of this description; expected among "
                                         f"{', '.join(required + optional)}")
        else:
            values[key if key in required + optional else swapped] = problems.number(f"truth.{key}", given[key])
    for key in required:
        if key not in values:
            problems.add(f"truth.{key}", "required")
    return {**{k: 0.0 for k in optional}, **values}


def _growth_truth(desc: Description, design: dict, values: dict, problems: _Problems) -> GrowthTruth | None:
    random = [t.value for t in desc.model.random]
    cov = [[values.get(f"var.{a}") if a == b else values.get(f"cov.{a}.{b}", values.get(f"cov.{b}.{a}"))
            for b in random] for a in random]
    effects: dict[str, dict[str, float]] = {}
    for key, value in values.items():
        if key.startswith("effect."):
            name, term = key[len("effect."):].rsplit(".", 1)
            effects.setdefault(name, {})[term] = value
    try:
        return GrowthTruth(
            n_persons=design.get("persons"), waves=tuple(design.get("waves") or ()),
            mean={t.value: values[f"mean.{t.value}"] for t in desc.model.terms},
            random_cov=tuple(map(tuple, cov)), random_terms=tuple(random), residual=values["var.residual"],
            effects=effects, predictors=dict(design.get("predictors") or {}),
            jitter=design.get("jitter", 0.0), missing_rate=design.get("missing_rate", 0.0))
    except (ValueError, TypeError, KeyError) as exc:
        problems.add("design", str(exc))
        return None


def load_population(path: str | Path, desc: Description) -> Population:
    """Read a population file for a description; raise one DescriptionError listing every problem."""
    path = Path(path)
    tree, problems = _read(path), _Problems(path.name)
    design = tree["design"]
    for key in set(design) - _DESIGN:
        problems.add(f"design.{key}", f"unknown key; expected one of {', '.join(sorted(_DESIGN))}")
    if desc.model.kind is not Kind.GROWTH:
        problems.add("description", f"simulation draws growth data; the description's model.kind is "
                                    f"{desc.model.kind.value}")
    if desc.data.layout is not Layout.LONG:
        problems.add("description", "simulation needs a long-layout description (data.layout: long)")
    origins = (desc.model.time_origin, desc.sem_form.time_origin, desc.mixed_form.time_origin)
    scales = (desc.sem_form.time_scale, desc.mixed_form.time_scale)
    if any(o not in (None, 0.0) for o in origins) or any(s not in (None, 1.0) for s in scales):
        problems.add("description", "the true values refer to time as drawn; use time_origin 0 and no form "
                                    "time coding")
    drawn = design.get("predictors") or {}
    for name in desc.model.predictors:
        if name not in drawn:
            problems.add(f"design.predictors.{name}", "the description uses this predictor; say how to draw it")
    effect_names = {name: _predictor_key(desc, name, spec, problems) for name, spec in drawn.items()}
    values = _truth_values(desc, tree["truth"], effect_names, problems)
    problems.raise_any()
    truth = _growth_truth(desc, design, values, problems)
    problems.raise_any()
    reported = {_reported(k, effect_names): v for k, v in values.items()}
    return Population(source=path.name, truth=truth, values=reported)


def _reported(key: str, effect_names: dict[str, str]) -> str:
    if not key.startswith("effect."):
        return key
    name, term = key[len("effect."):].rsplit(".", 1)
    return f"effect.{effect_names[name]}.{term}"


def simulation_description(desc: Description, population: Population) -> Description:
    """The description each replication is fitted with: the design's waves as the wave grid,
    and the simulator's column names (`person`, `time`, `outcome`)."""
    data = replace(desc.data, person="person", time="time", outcome="outcome")
    return replace(desc, data=data, estimation=replace(desc.estimation, waves=population.truth.waves))

"""Stage 3 for the cross-lagged family: the wide path model(s) and the long lagged regressions.

Observed variables are `v<k>_<t>` (outcome k at wave index t), person factors `h<k>`,
RI-CLPM traits `k<k>` and within-person parts `w<k>_<t>`. Labels name parameters;
`keys` maps each reconciled label to its quantity key.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..data import PanelData
from ..spec import Paths, Variant
from .growth import Correspondence
from .path import PathModel, Statement

INTERNAL_SD = 10.0


@dataclass(frozen=True)
class LongEquation:
    """One outcome's lagged regression: rows are (person, wave >= 2) with the outcome and every lag observed."""

    outcome: int
    y: np.ndarray
    X: np.ndarray            # columns: constant, then the lag of every outcome (centred within person for RI-CLPM)
    person: np.ndarray
    wave: np.ndarray         # wave index of each row
    labels: tuple[tuple[str, ...], ...]  # for each wave index: the SEM label of each column's coefficient
    residual: tuple[str, ...]            # for each wave index: the SEM label of the residual variance


@dataclass(frozen=True)
class CompiledPanel:
    panel: PanelData
    variant: Variant
    paths: Paths
    scale: float             # internal = user x scale
    sem: PathModel
    relaxed: PathModel | None
    frame: pd.DataFrame      # wide data on the internal scale, columns = sem.observed
    equations: tuple[LongEquation, ...]
    keys: dict[str, str]     # label -> quantity key
    correspondence: tuple[Correspondence, ...]

    @property
    def n_waves(self) -> int:
        return len(self.panel.waves)

    @property
    def equivalent(self) -> bool:
        """Whether the long form is the same model as the wide form (not so for the RI-CLPM)."""
        return self.variant is not Variant.RI_CLPM

    def to_user(self, label: str, value: float) -> float:
        """A parameter on the user's scale: paths are unit-free; means scale once, variances twice."""
        kind = self.keys.get(label, label)
        if kind.startswith(("intercept", "mean")):
            return value / self.scale
        if kind.startswith(("var", "cov")):
            return value / self.scale ** 2
        return value

    def quantities(self, values: dict[str, float]) -> dict[str, float]:
        return {key: self.to_user(label, values[label]) for label, key in self.keys.items() if label in values}


def _suffix(paths: Paths, t: int) -> str:
    return "" if paths is Paths.TIME_INVARIANT else f"_w{t}"


def _key_suffix(panel: PanelData, paths: Paths, t: int) -> str:
    return "" if paths is Paths.TIME_INVARIANT else f".wave{panel.waves[t]:g}"


def _first_wave(K: int) -> list[Statement]:
    out = [Statement("1", f"v{k}_0", label=f"m{k}") for k in range(K)]
    out += [Statement("~~", f"v{k}_0", f"v{j}_0", label=f"s{j}_{k}") for k in range(K) for j in range(k + 1)]
    return out


def _dynamics(panel: PanelData, paths: Paths, node: str, with_intercepts: bool) -> tuple[list[Statement], dict]:
    """Lagged regressions among `node` variables (observed v, or within parts w), residuals and their keys."""
    K, T, names = len(panel.names), len(panel.waves), panel.names
    out, keys = [], {}
    for t in range(1, T):
        sfx, ksfx = _suffix(paths, t), _key_suffix(panel, paths, t)
        for k in range(K):
            for j in range(K):
                label = f"a{k}{sfx}" if j == k else f"c{j}_{k}{sfx}"
                out.append(Statement("~", f"{node}{k}_{t}", f"{node}{j}_{t - 1}", label=label))
                keys[label] = (f"auto.{names[k]}" if j == k else f"cross.{names[j]}.{names[k]}") + ksfx
            if with_intercepts:
                out.append(Statement("1", f"{node}{k}_{t}", label=f"i{k}{sfx}"))
                keys[f"i{k}{sfx}"] = f"intercept.{names[k]}{ksfx}"
            out.append(Statement("~~", f"{node}{k}_{t}", f"{node}{k}_{t}", label=f"e{k}{sfx}"))
            keys[f"e{k}{sfx}"] = f"var.residual.{names[k]}{ksfx}"
        for k in range(K):
            for j in range(k):
                label = f"r{j}_{k}{sfx}"
                out.append(Statement("~~", f"{node}{j}_{t}", f"{node}{k}_{t}", label=label))
                keys[label] = ("cov.residual" if K == 2 else f"cov.residual.{names[j]}.{names[k]}") + ksfx
    return out, keys


def _clpm(panel: PanelData, paths: Paths):
    K, T = len(panel.names), len(panel.waves)
    statements, keys = _dynamics(panel, paths, "v", with_intercepts=True)
    observed = tuple(f"v{k}_{t}" for t in range(T) for k in range(K))
    return PathModel(observed, (), tuple(_first_wave(K) + statements)), keys


def _dynamic_panel(panel: PanelData, paths: Paths, relaxed: bool):
    K, T, names = len(panel.names), len(panel.waves), panel.names
    statements, keys = _dynamics(panel, paths, "v", with_intercepts=True)
    statements = [s for s in statements if not (s.op == "~~" and s.lhs != s.rhs)]   # equations uncorrelated
    keys = {label: key for label, key in keys.items() if not label.startswith("r")}
    persons = []
    for k in range(K):
        persons += [Statement("=~", f"h{k}", f"v{k}_{t}", value=1.0) for t in range(1, T)]
        persons += [Statement("1", f"h{k}", value=0.0), Statement("~~", f"h{k}", f"h{k}", label=f"u{k}")]
        keys[f"u{k}"] = f"var.trait.{names[k]}"
        persons += [Statement("~~", f"h{k}", f"v{j}_0", label=f"g{k}_{j}" if relaxed else None) for j in range(K)]
        persons += [Statement("~~", f"h{j}", f"h{k}") for j in range(k)]
    observed = tuple(f"v{k}_{t}" for t in range(T) for k in range(K))
    return PathModel(observed, tuple(f"h{k}" for k in range(K)), tuple(_first_wave(K) + statements + persons)), keys


def _ri_clpm(panel: PanelData, paths: Paths):
    K, T, names = len(panel.names), len(panel.waves), panel.names
    out = []
    for k in range(K):
        for t in range(T):
            out += [Statement("=~", f"k{k}", f"v{k}_{t}", value=1.0), Statement("=~", f"w{k}_{t}", f"v{k}_{t}", value=1.0),
                    Statement("1", f"v{k}_{t}", label=f"mu{k}_{t}"), Statement("~~", f"v{k}_{t}", f"v{k}_{t}"),
                    Statement("1", f"w{k}_{t}")]
        out += [Statement("1", f"k{k}"), Statement("~~", f"k{k}", f"k{k}", label=f"u{k}")]
        out += [Statement("~~", f"k{j}", f"k{k}", label=f"ut{j}_{k}") for j in range(k)]
        out += [Statement("~~", f"k{j}", f"w{k}_0") for j in range(K)]
        out += [Statement("~~", f"w{k}_0", f"w{j}_0", label=f"s{j}_{k}") for j in range(k + 1)]
    dynamics, keys = _dynamics(panel, paths, "w", with_intercepts=False)
    keys.update({f"u{k}": f"var.trait.{names[k]}" for k in range(K)})
    keys.update({f"ut{j}_{k}": "cov.trait" if K == 2 else f"cov.trait.{names[j]}.{names[k]}"
                 for k in range(K) for j in range(k)})
    observed = tuple(f"v{k}_{t}" for t in range(T) for k in range(K))
    latent = tuple(f"k{k}" for k in range(K)) + tuple(f"w{k}_{t}" for t in range(T) for k in range(K))
    return PathModel(observed, latent, tuple(out + dynamics)), keys


def _equations(panel: PanelData, paths: Paths, scale: float, centred: bool) -> tuple[LongEquation, ...]:
    K, T = len(panel.names), len(panel.waves)
    values = panel.values * scale
    out = []
    for k in range(K):
        person, wave = np.meshgrid(np.arange(panel.n_persons), np.arange(1, T), indexing="ij")
        y, lags = values[:, 1:, k], values[:, :-1, :]
        keep = np.isfinite(y) & np.isfinite(lags).all(axis=2)
        y, lags, person, wave = y[keep], lags[keep], person[keep], wave[keep]
        if centred:
            counts = np.bincount(person, minlength=panel.n_persons)[:, None]
            sums = np.zeros((panel.n_persons, K))
            np.add.at(sums, person, lags)
            lags = lags - (sums / np.maximum(counts, 1))[person]
        X = np.column_stack([np.ones(len(y)), lags])
        labels = tuple(tuple([f"i{k}{_suffix(paths, t)}"] + [(f"a{k}" if j == k else f"c{j}_{k}") + _suffix(paths, t)
                                                             for j in range(K)]) for t in range(T))
        residual = tuple(f"e{k}{_suffix(paths, t)}" for t in range(T))
        out.append(LongEquation(k, y, X, person, wave, labels, residual))
    return tuple(out)


def _correspondence(keys: dict[str, str], variant: Variant) -> tuple[Correspondence, ...]:
    long_terms = {"intercept": "constant of the lagged regression", "auto": "coefficient of the own lag",
                  "cross": "coefficient of the other outcome's lag", "var": "residual variance",
                  "cov": "covariance of the two equations' residuals"}
    if variant is Variant.RI_CLPM:
        long_terms.update(auto="coefficient of the own lag, centred on the person's mean",
                          cross="coefficient of the other outcome's lag, centred on the person's mean")
    out = []
    for label, key in keys.items():
        head = key.split(".")[0]
        long = long_terms[head]
        if key.startswith("var.trait"):
            long = "variance of the random person intercept"
        elif key.startswith("cov.trait"):
            long = "no counterpart (separate equations)"
        out.append(Correspondence(key, f"{key} [{label}]", long))
    return tuple(out)


def compile_panel(panel: PanelData) -> CompiledPanel:
    """The wide path model(s) and the long lagged regressions of a cross-lagged description."""
    model = panel.description.model
    variant, paths = model.variant, model.paths
    scale = INTERNAL_SD / float(np.nanstd(panel.values))
    relaxed = None
    if variant is Variant.CLPM:
        sem, keys = _clpm(panel, paths)
    elif variant is Variant.DYNAMIC_PANEL:
        sem, keys = _dynamic_panel(panel, paths, relaxed=False)
        relaxed, _ = _dynamic_panel(panel, paths, relaxed=True)
    else:
        sem, keys = _ri_clpm(panel, paths)
    columns = {f"v{k}_{t}": panel.values[:, t, k] * scale for t in range(len(panel.waves))
               for k in range(len(panel.names))}
    frame = pd.DataFrame(columns)[list(sem.observed)]
    return CompiledPanel(panel=panel, variant=variant, paths=paths, scale=scale, sem=sem, relaxed=relaxed,
                         frame=frame, equations=_equations(panel, paths, scale, variant is Variant.RI_CLPM),
                         keys=keys, correspondence=_correspondence(keys, variant))

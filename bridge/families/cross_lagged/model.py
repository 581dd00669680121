"""The cross-lagged family's compiled models: the wide path model(s) and the long lagged regressions.

Observed variables are `v<k>_<t>` (outcome k at wave index t), person factors `h<k>`,
RI-CLPM traits `k<k>` and within-person parts `w<k>_<t>`. Labels name parameters;
`keys` maps each reconciled label to its quantity key.

Each outcome has its own internal scale (internal = user x `scales[k]`, internal SD 10):
outcomes on very different scales (log wage beside weeks worked) then both sit well
above 1, where semopy's objective stays positive. A parameter goes back to the user's
scale by one factor, read off the statement it belongs to (`user_factor`): a mean of
outcome k divides by s_k, a (co)variance of k and j by s_k s_j, a path from j to k is
multiplied by s_j / s_k. Standard errors take the same factor (the Jacobian of a
diagonal linear map).
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd

from dataclasses import replace

from ...compile.growth import Correspondence
from ...compile.path import PathModel, Statement
from ...spec import Paths, Variant
from .data import PanelData

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
    scales: tuple[float, ...]  # internal = user x scales[k], per outcome
    sem: PathModel           # the wide model the long form is equivalent to (restricted, for the dynamic panel)
    relaxed: PathModel | None  # the dynamic panel's wide form with initial conditions and correlated equations
    frame: pd.DataFrame      # wide data on the internal scale, columns = sem.observed
    equations: tuple[LongEquation, ...]
    keys: dict[str, str]     # label -> quantity key
    correspondence: tuple[Correspondence, ...]

    @property
    def family(self):
        """The family object (`bridge.families.contract.Family`) shared stages ask for family-specific parts."""
        from . import FAMILY

        return FAMILY

    @property
    def n_waves(self) -> int:
        return len(self.panel.waves)

    @property
    def equivalent(self) -> bool:
        """Whether the long form is the same model as the wide form (not so for the RI-CLPM)."""
        return self.variant is not Variant.RI_CLPM

    @cached_property
    def factors(self) -> dict[str, float]:
        """Internal -> user factor of every label (module docstring)."""
        return label_factors(self)

    def user_factor(self, label: str) -> float:
        """The factor that takes a parameter from the internal to the user's scale (module docstring)."""
        return self.factors[label]

    def to_user(self, label: str, value: float) -> float:
        return float(value) * self.user_factor(label)

    def values_to_user(self, values: dict[str, float], se: bool = False) -> dict[str, float]:
        """Every parameter by label on the user's scale (standard errors: the absolute value)."""
        out = {label: self.to_user(label, v) for label, v in values.items()}
        return {k: abs(v) for k, v in out.items()} if se else out

    def values_from_user(self, values: dict[str, float]) -> dict[str, float]:
        return {label: float(v) / self.user_factor(label) for label, v in values.items() if label in self.factors}

    def log_shift(self, counts) -> float:
        """Internal -> user log-likelihood: + sum over observed values of log(scale of their outcome)."""
        return float(np.dot(np.asarray(counts, float), np.log(self.scales)))

    def rescaled(self, factor: float) -> "CompiledPanel":
        """The same plan with every outcome's internal scale multiplied by `factor` (the rescale-and-retry guard)."""
        return _compile(self.panel, tuple(s * factor for s in self.scales))


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
    """The dynamic panel's wide form.

    Restricted (`relaxed=False`): the exact counterpart of one mixed model per outcome; the person
    factors are unrelated to the first wave, to each other, and the equations' residuals are
    uncorrelated. Relaxed: person factors correlate with the first wave (Allison, Williams &
    Moral-Benito 2017) and with each other, and the residuals of the equations correlate within a wave.
    """
    K, T, names = len(panel.names), len(panel.waves), panel.names
    statements, keys = _dynamics(panel, paths, "v", with_intercepts=True)
    if not relaxed:  # equations uncorrelated: the residual covariances fixed at 0
        statements = [replace(s, label=None, value=0.0) if s.op == "~~" and s.lhs != s.rhs else s
                      for s in statements]
    persons = []
    for k in range(K):
        persons += [Statement("=~", f"h{k}", f"v{k}_{t}", value=1.0) for t in range(1, T)]
        persons += [Statement("1", f"h{k}", value=0.0), Statement("~~", f"h{k}", f"h{k}", label=f"u{k}")]
        keys[f"u{k}"] = f"var.trait.{names[k]}"
        persons += [Statement("~~", f"h{k}", f"v{j}_0", label=f"g{k}_{j}" if relaxed else None) for j in range(K)]
        persons += [Statement("~~", f"h{j}", f"h{k}", label=f"ut{j}_{k}" if relaxed else None) for j in range(k)]
        keys.update({f"ut{j}_{k}": "cov.trait" if K == 2 else f"cov.trait.{names[j]}.{names[k]}" for j in range(k)})
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


def _equations(panel: PanelData, paths: Paths, values: np.ndarray, centred: bool) -> tuple[LongEquation, ...]:
    K, T = len(panel.names), len(panel.waves)
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
    separate = "none: each outcome's mixed model is fitted on its own, which fixes this covariance at 0"
    long_terms = {"intercept": "constant of the lagged regression", "auto": "coefficient of the own lag",
                  "cross": "coefficient of the other outcome's lag", "var": "residual variance",
                  "cov": "covariance of the two equations' residuals (from the least-squares residuals)"}
    if variant is not Variant.CLPM:
        long_terms["cov"] = separate
    if variant is Variant.RI_CLPM:
        long_terms.update(auto="coefficient of the own lag, centred on the person's mean",
                          cross="coefficient of the other outcome's lag, centred on the person's mean")
    out = []
    for label, key in keys.items():
        long = long_terms[key.split(".")[0]]
        if key.startswith("var.trait"):
            long = "variance of the random person intercept"
        elif key.startswith("cov.trait"):
            long = separate
        out.append(Correspondence(key, f"{key} [{label}]", long))
    return tuple(out)


def _outcome_of(node: str) -> int:
    """The outcome a generated variable belongs to: `v1_3`, `w1_3`, `h1`, `k1` -> 1."""
    return int(node[1:].partition("_")[0])


def label_factors(compiled: CompiledPanel) -> dict[str, float]:
    """Internal -> user factor of every label of the plan's wide and long forms."""
    s = compiled.scales
    out = {}
    for model in filter(None, (compiled.sem, compiled.relaxed)):
        for st in model.statements:
            if not st.label:
                continue
            k = _outcome_of(st.lhs)
            if st.op == "1":
                out[st.label] = 1.0 / s[k]
            elif st.op == "~~":
                out[st.label] = 1.0 / (s[k] * s[_outcome_of(st.rhs)])
            elif st.op == "~":
                out[st.label] = s[_outcome_of(st.rhs)] / s[k]
            else:
                out[st.label] = s[_outcome_of(st.rhs)] / s[k]
    for eq in compiled.equations:   # the long form's constants (the RI-CLPM's wide form has none)
        for labels in eq.labels:
            out.setdefault(labels[0], 1.0 / s[eq.outcome])
        out.setdefault(f"u{eq.outcome}", 1.0 / s[eq.outcome] ** 2)   # the person intercept's variance
    return out


def internal_scales(panel: PanelData) -> tuple[float, ...]:
    """One internal scale per outcome: its observed values get SD `INTERNAL_SD`."""
    return tuple(INTERNAL_SD / float(np.nanstd(panel.values[:, :, k])) for k in range(len(panel.names)))


def compile_panel(panel: PanelData) -> CompiledPanel:
    """The wide path model(s) and the long lagged regressions of a cross-lagged description."""
    return _compile(panel, internal_scales(panel))


def _compile(panel: PanelData, scales: tuple[float, ...]) -> CompiledPanel:
    model = panel.description.model
    variant, paths = model.variant, model.paths
    relaxed = None
    if variant is Variant.CLPM:
        sem, keys = _clpm(panel, paths)
    elif variant is Variant.DYNAMIC_PANEL:
        sem, keys = _dynamic_panel(panel, paths, relaxed=False)
        relaxed, keys = _dynamic_panel(panel, paths, relaxed=True)
    else:
        sem, keys = _ri_clpm(panel, paths)
    internal = panel.values * np.asarray(scales)[None, None, :]
    columns = {f"v{k}_{t}": internal[:, t, k] for t in range(len(panel.waves)) for k in range(len(panel.names))}
    frame = pd.DataFrame(columns)[list(sem.observed)]
    return CompiledPanel(panel=panel, variant=variant, paths=paths, scales=tuple(scales), sem=sem, relaxed=relaxed,
                         frame=frame, equations=_equations(panel, paths, internal, variant is Variant.RI_CLPM),
                         keys=keys, correspondence=_correspondence(keys, variant))

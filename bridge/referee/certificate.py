"""Certificates: the referee's proof that a library's solution is a maximum of the model that library fitted.

A library's "converged" is never taken on trust. For each solution the referee
1. reproduces the library's own log-likelihood at the library's estimates;
2. maximises its own likelihood locally from that point (projected Newton with a
   backtracking line search, box bounds for variances) and measures how much it
   gains and how far every parameter moves;
3. reads the curvature at its maximum (negative definite, or flat along some direction).
The solution is certified when the reproduction matches, the gain is negligible and
every parameter is within `MOVE_RELATIVE` of the referee's maximum (or within
`MOVE_SE` of its standard error for values near zero). The referee's maximum
(`LocalMaximum.point`) is where a library that stopped short is refitted from.

The derivatives are our own central differences (`hessian.numerical_hessian`) with a
fixed number of evaluations: every evaluation is a full pass over the data, and the
adaptive schemes of general derivative libraries spend many more of them.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from .hessian import numerical_hessian

REPRODUCTION = 1e-6      # |library - referee| / max(1, |referee|): the library's log-likelihood is reproduced
GAIN = 1e-6              # log-likelihood units the referee may still gain from a certified solution
MOVE_RELATIVE = 1e-5     # largest move of a parameter to the referee's maximum, relative to its size ...
MOVE_SE = 1e-3           # ... or relative to its standard error (values near zero)
FLAT = 1e-8              # an eigenvalue of -H below this share of the largest is a flat direction

Criterion = Callable[[np.ndarray], float]


@dataclass(frozen=True)
class LocalMaximum:
    """The referee's own maximum near a starting point."""

    point: np.ndarray
    value: float
    hessian: np.ndarray      # of the criterion at `point`, over all coordinates
    active: np.ndarray       # coordinates held at a bound
    iterations: int
    start_decrement: float   # g'(-H)^-1 g / 2 at the starting point: the gain a Newton step predicted there

    @property
    def free(self) -> np.ndarray:
        return ~self.active

    def standard_errors(self) -> np.ndarray:
        """Square roots of the diagonal of (-H)^-1 over the free coordinates (NaN where undefined)."""
        out = np.full(len(self.point), np.nan)
        free = self.free
        if not free.any():
            return out
        try:
            cov = np.linalg.inv(-self.hessian[np.ix_(free, free)])
        except np.linalg.LinAlgError:
            return out
        diag = np.diag(cov)
        out[free] = np.where(diag > 0, np.sqrt(np.abs(diag)), np.nan)
        return out


@dataclass(frozen=True)
class Certificate:
    """Whether one library's solution is a maximum of the model it fitted, with the numbers that show it."""

    library: str
    form: str                   # "wide" or "long" (or an equation of the long form)
    criterion: str              # "ml" or "reml"
    reported: float             # the library's own log-likelihood (user's scale)
    referee: float              # the referee's value at the library's estimates (user's scale)
    gain: float                 # the referee's local maximum minus its value at the library's estimates
    newton_decrement: float     # g'(-H)^-1 g / 2 at the library's estimates: the gain a Newton step predicts
    largest_move: float         # largest parameter move to the referee's maximum, in units of the allowed move
    curvature: str              # "negative definite", or "flat along k direction(s)"
    boundary: tuple[str, ...]   # parameters held at a bound of the library's parameter space
    starts: int = 1
    passed: bool = False
    reason: str = ""            # one line; empty when passed
    repairs: tuple[str, ...] = field(default=())

    def with_repair(self, text: str) -> "Certificate":
        return replace(self, repairs=self.repairs + (text,))

    def to_dict(self) -> dict:
        return {"library": self.library, "form": self.form, "criterion": self.criterion, "passed": self.passed,
                "reason": self.reason, "reported": self.reported, "referee": self.referee, "gain": self.gain,
                "newton_decrement": self.newton_decrement, "largest_move": self.largest_move,
                "curvature": self.curvature, "boundary": list(self.boundary), "starts": self.starts,
                "repairs": list(self.repairs)}


def default_steps(x: np.ndarray) -> np.ndarray:
    """Finite-difference steps: 1e-4 of each value, never below 1e-4 of the typical size (common practice)."""
    typical = max(float(np.abs(x).max()) if len(x) else 1.0, 1e-8)
    return 1e-4 * np.maximum(np.abs(x), 1e-2 * typical)


def _safe(criterion: Criterion) -> Criterion:
    def value(x: np.ndarray) -> float:
        try:
            v = float(criterion(x))
        except (np.linalg.LinAlgError, FloatingPointError, ValueError, ZeroDivisionError, OverflowError):
            return -np.inf
        return v if np.isfinite(v) else -np.inf
    return value


def gradient(f: Criterion, x: np.ndarray, steps: np.ndarray) -> np.ndarray:
    """Fourth-order central differences, first-order one-sided where the criterion is undefined on one side.

    The five-point stencil matters: near a flat or badly scaled maximum the error of plain central
    differences (step^2 x third derivative) hides gains of 1e-8 log-likelihood units.
    """
    g = np.zeros(len(x))
    f0 = f(x)
    for i in range(len(x)):
        e = np.zeros(len(x))
        e[i] = steps[i]
        up, down = f(x + e), f(x - e)
        if np.isfinite(up) and np.isfinite(down):
            up2, down2 = f(x + 2 * e), f(x - 2 * e)
            if np.isfinite(up2) and np.isfinite(down2):
                g[i] = (8 * (up - down) - (up2 - down2)) / (12 * steps[i])
            else:
                g[i] = (up - down) / (2 * steps[i])
        elif np.isfinite(up):
            g[i] = (up - f0) / steps[i]
        elif np.isfinite(down):
            g[i] = (f0 - down) / steps[i]
    return g


def _hessian(f: Criterion, x: np.ndarray, steps: np.ndarray) -> np.ndarray:
    H = numerical_hessian(f, x, steps)
    if np.all(np.isfinite(H)):
        return H
    # undefined on one side of a bound: difference the gradient forward instead
    H = np.zeros((len(x), len(x)))
    g0 = gradient(f, x, steps)
    for i in range(len(x)):
        e = np.zeros(len(x))
        e[i] = steps[i]
        inside = x + e if np.isfinite(f(x + e)) else x - e
        H[:, i] = (gradient(f, inside, steps) - g0) / (inside[i] - x[i])
    return 0.5 * (H + H.T)


def _ascent(H: np.ndarray, g: np.ndarray) -> tuple[np.ndarray, float]:
    """Newton direction for a maximum, with the Hessian's eigenvalues made negative where they are not."""
    if len(g) == 0:
        return np.zeros(0), 0.0
    w, V = np.linalg.eigh(-H)
    top = max(float(np.abs(w).max()), 1e-300)
    w = np.maximum(np.abs(w), FLAT * top)
    step = V @ ((V.T @ g) / w)
    return step, 0.5 * float(g @ step)


def _active(x: np.ndarray, g: np.ndarray, lower: np.ndarray, upper: np.ndarray, steps: np.ndarray) -> np.ndarray:
    at_lower = (x <= lower + steps) & (g <= 0)
    at_upper = (x >= upper - steps) & (g >= 0)
    return at_lower | at_upper


def maximise_locally(criterion: Criterion, x0: np.ndarray, lower: np.ndarray | None = None,
                     upper: np.ndarray | None = None, max_iterations: int = 40) -> LocalMaximum:
    """The referee's maximum of `criterion` near `x0` within box bounds (projected Newton, backtracking)."""
    f = _safe(criterion)
    n = len(x0)
    lower = np.full(n, -np.inf) if lower is None else np.asarray(lower, float)
    upper = np.full(n, np.inf) if upper is None else np.asarray(upper, float)
    x = np.clip(np.asarray(x0, float), lower, upper)
    value = f(x)
    if not np.isfinite(value):
        raise ValueError("the criterion is not defined at the starting point")
    iterations, start_decrement = 0, np.nan
    for iterations in range(1, max_iterations + 1):
        steps = default_steps(x)
        g = gradient(f, x, steps)
        active = _active(x, g, lower, upper, steps)
        free = ~active
        H = _hessian(f, x, steps)
        direction = np.zeros(n)
        direction[free], decrement = _ascent(H[np.ix_(free, free)], g[free])
        if iterations == 1:
            start_decrement = decrement
        if decrement <= max(1e-11, 1e-14 * abs(value)):
            break
        t, improved = 1.0, False
        while t > 1e-10:
            candidate = np.clip(x + t * direction, lower, upper)
            new = f(candidate)
            if new > value:
                x, value, improved = candidate, new, True
                break
            t *= 0.5
        if not improved:
            break
    steps = default_steps(x)
    g = gradient(f, x, steps)
    return LocalMaximum(point=x, value=value, hessian=_hessian(f, x, steps),
                        active=_active(x, g, lower, upper, steps), iterations=iterations,
                        start_decrement=float(start_decrement))


def curvature(maximum: LocalMaximum) -> tuple[str, int]:
    """How the criterion bends at the maximum over the free coordinates: ('negative definite' | 'flat ...', k)."""
    free = maximum.free
    if not free.any():
        return "negative definite", 0
    w = np.linalg.eigvalsh(-maximum.hessian[np.ix_(free, free)])
    top = max(float(np.abs(w).max()), 1e-300)
    flat = int((w <= FLAT * top).sum())
    return ("negative definite" if flat == 0 else f"flat along {flat} direction(s)"), flat


def moves(solution: np.ndarray, maximum: np.ndarray, se: np.ndarray) -> np.ndarray:
    """Each quantity's distance to the referee's maximum in units of its allowed move (<= 1 passes).

    Allowed: MOVE_RELATIVE of the value; for a value near zero (within one standard error of it)
    MOVE_SE of its standard error instead, when that is larger.
    """
    finite = np.isfinite(se)
    near_zero = finite & (np.abs(maximum) < np.where(finite, se, 0.0))
    by_se = np.where(near_zero, MOVE_SE * np.where(finite, se, 0.0), 0.0)
    allowed = np.maximum(MOVE_RELATIVE * np.abs(maximum), by_se)
    allowed = np.maximum(allowed, 1e-12 * max(1.0, float(np.abs(maximum).max()) if len(maximum) else 1.0))
    return np.abs(solution - maximum) / allowed


def verdict_of(reported: float, referee: float, gain: float, largest_move: float) -> tuple[bool, str]:
    """Pass or fail, with the one-line reason of a failure."""
    if not np.isfinite(reported):
        return False, "the library reported a log-likelihood that is not finite"
    if not np.isfinite(referee):
        return False, "the library's estimates lie outside the model's parameter space (the referee's likelihood is not defined there)"
    if abs(reported - referee) > REPRODUCTION * max(1.0, abs(referee)):
        return False, (f"the library reports log-likelihood {reported:.6f} but its estimates give {referee:.6f} "
                       "under the referee")
    if gain > GAIN:
        return False, f"the referee finds a point {gain:.3g} log-likelihood units higher near the library's solution"
    if largest_move > 1.0:
        return False, (f"an estimate is {largest_move:.3g} times the allowed distance from the referee's maximum "
                       f"(allowed: {MOVE_RELATIVE:g} relative or {MOVE_SE:g} SE)")
    return True, ""


def _quantity_se(quantities: Callable[[np.ndarray], np.ndarray], maximum: LocalMaximum) -> np.ndarray:
    """Delta-method standard errors of the reported quantities at the referee's maximum."""
    x = maximum.point
    base = np.asarray(quantities(x), float)
    free = maximum.free
    if not free.any():
        return np.full(len(base), np.nan)
    try:
        cov = np.linalg.inv(-maximum.hessian[np.ix_(free, free)])
    except np.linalg.LinAlgError:
        return np.full(len(base), np.nan)
    steps = default_steps(x)
    J = np.zeros((len(base), int(free.sum())))
    for col, i in enumerate(np.flatnonzero(free)):
        e = np.zeros(len(x))
        e[i] = steps[i]
        J[:, col] = (np.asarray(quantities(x + e), float) - np.asarray(quantities(x - e), float)) / (2 * steps[i])
    diag = np.einsum("ij,jk,ik->i", J, cov, J)
    return np.where(diag > 0, np.sqrt(np.abs(diag)), np.nan)


def certify(criterion: Criterion, x: np.ndarray, names: tuple[str, ...], reported: float, *, library: str,
            form: str, criterion_name: str = "ml", lower: np.ndarray | None = None,
            upper: np.ndarray | None = None, shift: float = 0.0, starts: int = 1,
            quantities: Callable[[np.ndarray], np.ndarray] | None = None,
            at_solution: float | None = None,
            singular: Callable[[np.ndarray], bool] | None = None) -> tuple[Certificate, LocalMaximum | None]:
    """Certify a library's solution `x` of `criterion` (the referee's log-likelihood of the library's model).

    `shift` turns the criterion's value into the user's scale of `reported`; `quantities` maps a
    parameter vector to the numbers the tool reports (identity by default), on which moves are measured;
    `names` label the coordinates (for the boundary list). When the criterion profiles some parameters
    out, `at_solution` is the referee's value (criterion's scale) at the library's full solution: it is
    what the library's own value must reproduce, and the gain is measured from it. `singular` says
    whether a point lies on a boundary that is not a bound of the coordinates (a singular covariance).
    On any boundary standard errors are not ordinary, so every move is held to MOVE_RELATIVE alone.
    """
    f = _safe(criterion)
    x = np.asarray(x, float)
    at_solution = f(x) if at_solution is None else float(at_solution)
    referee = at_solution + shift
    if not np.isfinite(at_solution):
        passed, reason = verdict_of(reported, referee, np.inf, np.inf)
        return Certificate(library, form, criterion_name, reported, referee, np.inf, np.inf, np.inf,
                           "undefined", (), starts, passed, reason), None
    maximum = maximise_locally(f, x, lower, upper)
    decrement = maximum.start_decrement
    gain = max(0.0, maximum.value - at_solution)
    measure = quantities or (lambda v: v)
    shape, flat = curvature(maximum)
    edge = bool(maximum.active.any()) or flat > 0 or (singular is not None and singular(maximum.point))
    se = np.full(len(np.asarray(measure(x))), np.nan) if edge else _quantity_se(measure, maximum)
    move = moves(np.asarray(measure(x), float), np.asarray(measure(maximum.point), float), se)
    largest = float(move.max()) if len(move) else 0.0
    boundary = tuple(n for n, a in zip(names, maximum.active) if a)
    passed, reason = verdict_of(reported, referee, gain, largest)
    return Certificate(library, form, criterion_name, float(reported), float(referee), float(gain), float(decrement),
                       largest, shape, boundary, starts, passed, reason), maximum

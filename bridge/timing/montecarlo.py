"""Monte Carlo study of both forms: draw data from a known population, fit, reconcile, summarise.

Each replication draws one data set (`simulate_growth`), shapes it in memory (`shape_frame`),
fits both forms and reconciles them (`evaluate` + `reconcile`, the two steps of
`pipeline.run_shaped`, kept apart so the fits' convergence flags stay visible). Replication
i uses the i-th child of `numpy.random.SeedSequence(seed).spawn(R)`, and every replication
runs with one BLAS thread, so its result does not depend on where or next to what it ran:
one process, a local process pool, or a Dask cluster give the same numbers.
"""
from __future__ import annotations

import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from multiprocessing import get_context
from typing import Callable, Iterable

import numpy as np

from ..compile import Plan
from ..data import shape_frame
from ..errors import SembridgeError
from ..simulate.growth import simulate_growth
from ..spec import Description
from .population import Population, simulation_description

Z_95 = 1.959963984540054  # standard normal 97.5% quantile: the Wald interval is estimate +- Z_95 x SE
FRAMEWORKS = ("sem", "mixed")
OnDone = Callable[[int, int], None]
SCHEDULER_TIMEOUT = "20s"  # how long to wait for a Dask scheduler before giving up


@dataclass(frozen=True)
class ReplicationRow:
    """One quantity in one framework in one replication."""

    replication: int
    quantity: str
    framework: str          # "sem" (wide form) or "mixed" (long form)
    truth: float
    estimate: float
    se: float
    ci_low: float
    ci_high: float
    covered: bool
    converged: bool         # the framework's final fit reported success and every estimate is finite
    verdict: str            # the reconciler's verdict on this quantity (agree, explained, unexplained)


@dataclass(frozen=True)
class Replication:
    """What one replication produced; `verdict` is the overall verdict, or `failed` with `error` set."""

    index: int
    seed: int
    verdict: str
    rows: tuple[ReplicationRow, ...]
    seconds: float
    error: str = ""


@dataclass(frozen=True)
class Task:
    """Everything one replication needs, small enough to ship to another process."""

    index: int
    seed: int
    description: Description
    population: Population


def replication_seeds(seed: int, replications: int) -> list[int]:
    """One seed per replication from a seed sequence: the same list whatever runs the replications."""
    children = np.random.SeedSequence(seed).spawn(replications)
    return [int(child.generate_state(1, np.uint32)[0]) for child in children]


def _converged(fit) -> bool:
    values = np.concatenate([np.ravel(fit.params.fixed), np.ravel(fit.params.cov), np.ravel(fit.params.residual)])
    return bool(fit.reported_success and np.isfinite(values).all())


def _rows(task: Task, reconciliation, adjudication) -> tuple[ReplicationRow, ...]:
    converged = {"sem": _converged(adjudication.sem), "mixed": _converged(adjudication.mixed)}
    rows = []
    for quantity in reconciliation.quantities:
        truth = task.population.true_value(quantity.key)
        if truth is None:
            continue
        for framework, estimate in (("sem", quantity.sem), ("mixed", quantity.mixed)):
            low, high = estimate.estimate - Z_95 * estimate.se, estimate.estimate + Z_95 * estimate.se
            rows.append(ReplicationRow(
                replication=task.index, quantity=quantity.key, framework=framework, truth=float(truth),
                estimate=float(estimate.estimate), se=float(estimate.se), ci_low=float(low), ci_high=float(high),
                covered=bool(low <= truth <= high), converged=converged[framework],
                verdict=quantity.verdict.value))
    return tuple(rows)


def run_replication(task: Task) -> Replication:
    """Draw, shape, fit, reconcile and tabulate one replication (one BLAS thread, any failure recorded)."""
    from threadpoolctl import threadpool_limits

    from ..reconcile.build import reconcile
    from ..reconcile.evaluation import evaluate

    began = time.perf_counter()
    try:
        with threadpool_limits(limits=1):
            frame = simulate_growth(task.population.truth, task.seed)
            shaped = shape_frame(task.description, frame)
            base = evaluate(shaped, Plan.from_description(shaped.description))
            result = reconcile(shaped, base)
        return Replication(index=task.index, seed=task.seed, verdict=result.verdict.value,
                           rows=_rows(task, result, base.adjudication), seconds=time.perf_counter() - began)
    except Exception as exc:  # a replication that cannot be fitted counts as not converged, the study goes on
        first = str(exc).splitlines()[0] if str(exc) else ""
        return Replication(index=task.index, seed=task.seed, verdict="failed", rows=(),
                           seconds=time.perf_counter() - began, error=f"{exc.__class__.__name__}: {first}")


def _serial(tasks: list[Task], on_done: OnDone) -> Iterable[Replication]:
    for done, task in enumerate(tasks, 1):
        result = run_replication(task)
        on_done(done, len(tasks))
        yield result


def _processes(tasks: list[Task], workers: int, on_done: OnDone) -> Iterable[Replication]:
    with ProcessPoolExecutor(max_workers=workers, mp_context=get_context("spawn")) as pool:
        futures = [pool.submit(run_replication, task) for task in tasks]
        for done, future in enumerate(as_completed(futures), 1):
            on_done(done, len(tasks))
            yield future.result()


def _dask(tasks: list[Task], scheduler, on_done: OnDone) -> Iterable[Replication]:
    from dask.distributed import Client
    from dask.distributed import as_completed as dask_completed

    try:
        client = Client(scheduler, timeout=SCHEDULER_TIMEOUT)
    except (OSError, TimeoutError, ValueError) as exc:
        raise SembridgeError(f"cannot reach the Dask scheduler at {scheduler} ({exc.__class__.__name__})") from exc
    with client:
        futures = client.map(run_replication, tasks, pure=False)
        for done, future in enumerate(dask_completed(futures), 1):
            on_done(done, len(tasks))
            yield future.result()


def run_replications(description: Description, population: Population, replications: int, seed: int = 0,
                     workers: int = 1, scheduler=None, on_done: OnDone | None = None) -> tuple[Replication, ...]:
    """Run every replication: in this process (`workers=1`), on a local process pool, or on a Dask cluster.

    `scheduler` is a Dask scheduler address (or a cluster object); `on_done(done, total)`
    is called as replications finish. The result is ordered by replication.
    """
    if replications < 1:
        raise SembridgeError(f"the number of replications must be at least 1, got {replications}")
    if workers < 1:
        raise SembridgeError(f"the number of workers must be at least 1, got {workers}")
    desc = simulation_description(description, population)
    tasks = [Task(i, s, desc, population) for i, s in enumerate(replication_seeds(seed, replications))]
    on_done = on_done or (lambda done, total: None)
    if scheduler is not None:
        results = _dask(tasks, scheduler, on_done)
    elif workers == 1:
        results = _serial(tasks, on_done)
    else:
        results = _processes(tasks, workers, on_done)
    return tuple(sorted(results, key=lambda r: r.index))

"""Independent fits (held-out folds, C-curve points) on this machine's cores or a Dask cluster.

Every task is a call ``fn(*shared, *task)``. ``shared`` holds the large, read-only inputs
(the feature matrix, the labels, a fold-feature builder): on a Dask cluster they are scattered
once to every worker (``client.scatter(..., broadcast=True)`` through joblib's Dask backend)
and each task then ships only its own small arguments (row positions, C) and brings back its
small result (decision values of the fold's held-out rows). On this machine the tasks run in
threads: LIBSVM and the numpy passes of the primal solver release the GIL, and threads share
the matrix without copying it.

Results are assembled by task index, never by completion order, so they are the same whatever
the number of jobs or where the tasks ran.
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any

from reviewer.core.errors import SettingsError
from reviewer.core.progress import Reporter

# A Dask scheduler that does not answer within this many seconds is reported as unreachable.
CONNECT_SECONDS = 10.0
# Below this predicted serial time (seconds) a batch of tasks stays on one thread: starting
# threads and splitting the work cost more than they save (tests/benchmarks/fold_speed.py).
PARALLEL_MIN_SECONDS = 0.2
# joblib backend on this machine: "threading" (measured against "loky" processes in
# tests/benchmarks/fold_speed.py).
LOCAL_BACKEND = "threading"

_ADDRESS = re.compile(r"^(tcp|tls|inproc|ucx|ws|wss)://[^\s/]+(:\d+)?/?$")


def usable_cores() -> int:
    """CPU cores this process may run on (its affinity mask, not the machine's count)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


def resolve_jobs(jobs: int | None) -> int:
    """``None`` means every usable core; otherwise a whole number of at least 1."""
    if jobs is None:
        return usable_cores()
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise SettingsError(f"jobs must be a whole number of at least 1, got {jobs!r}")
    return jobs


def check_address(address: str) -> str:
    """A Dask scheduler address such as tcp://10.0.0.5:8786; anything else is refused."""
    text = str(address).strip()
    if not _ADDRESS.match(text):
        raise SettingsError(
            f"cluster address {address!r} is not a Dask scheduler address such as "
            "tcp://10.0.0.5:8786"
        )
    return text


def connect(address: str, timeout: float = CONNECT_SECONDS) -> Any:
    """A ``distributed.Client`` on the scheduler at ``address``, or one clear SettingsError."""
    address = check_address(address)
    try:
        from distributed import Client
    except ImportError:
        raise SettingsError(
            f"running on the cluster {address} needs the optional package 'distributed': "
            "pip install 'margin-reviewer[cluster]'"
        ) from None
    try:
        client = Client(address, timeout=f"{timeout:g}s", set_as_default=False)
    except (OSError, TimeoutError) as exc:
        raise SettingsError(
            f"cannot reach the Dask scheduler at {address} within {timeout:g} s "
            f"({type(exc).__name__}: {' '.join(str(exc).split())[:160]})"
        ) from None
    try:
        client.wait_for_workers(1, timeout=timeout)
    except (OSError, TimeoutError):
        client.close()
        raise SettingsError(
            f"the Dask scheduler at {address} has no worker (none joined within {timeout:g} s)"
        ) from None
    return client


def _call(fn: Callable[..., Any], index: int, *args: Any) -> tuple[int, Any]:
    return index, fn(*args)


def _worth_scattering(obj: Any) -> bool:
    return obj is not None and not isinstance(obj, (bool, int, float, str))


@contextmanager
def _dask_backend(address: str, shared: Sequence[Any]) -> Iterator[int]:
    from joblib import parallel_config

    client = connect(address)
    try:
        workers = len(client.scheduler_info(n_workers=-1)["workers"])
        nthreads = sum(client.nthreads().values()) or workers
        with client.as_current():
            with parallel_config(
                backend="dask",
                scatter=[s for s in shared if _worth_scattering(s)],
                wait_for_workers_timeout=CONNECT_SECONDS,
            ):
                yield max(1, nthreads)
    finally:
        client.close()


def run_tasks(
    fn: Callable[..., Any],
    shared: Sequence[Any],
    tasks: Sequence[tuple[Any, ...]],
    *,
    jobs: int | None = 1,
    cluster: str | None = None,
    predicted_seconds: float | None = None,
    report: Reporter | None = None,
    message: Callable[[int, int], str] | None = None,
    backend: str | None = None,
) -> list[Any]:
    """``[fn(*shared, *task) for task in tasks]``, in task order, run where asked.

    ``cluster`` (a Dask scheduler address) wins over ``jobs``. On this machine, ``jobs``
    threads (``None``: every usable core) run the tasks unless there is one task, one job,
    or ``predicted_seconds`` of serial work is under PARALLEL_MIN_SECONDS. ``report`` gets
    a progress step after each finished task and its cancel is honoured between tasks.
    """
    report = report or Reporter()
    total = len(tasks)
    out: list[Any] = [None] * total

    def step(done: int) -> None:
        report(done / max(total, 1), message(done, total) if message else "")

    n_jobs = resolve_jobs(jobs)
    serial = cluster is None and (
        n_jobs == 1
        or total <= 1
        or (predicted_seconds is not None and predicted_seconds < PARALLEL_MIN_SECONDS)
    )
    if serial:
        for i, task in enumerate(tasks):
            report.check()
            out[i] = fn(*shared, *task)
            step(i + 1)
        return out

    from joblib import Parallel, delayed

    calls = [delayed(_call)(fn, i, *shared, *task) for i, task in enumerate(tasks)]
    report.check()
    if cluster is not None:
        with _dask_backend(cluster, shared) as width:
            gen = Parallel(n_jobs=min(width, total), return_as="generator_unordered")(calls)
            _collect(gen, out, report, step)
        return out
    backend = backend or LOCAL_BACKEND
    width = min(n_jobs, total)
    if backend == "threading":
        from threadpoolctl import threadpool_limits

        # One BLAS thread per task thread; set here, once, so the solvers' own limits
        # (entered and left from several threads at once) save and restore this same value.
        with threadpool_limits(limits=1, user_api="blas"):
            gen = Parallel(n_jobs=width, backend=backend, return_as="generator_unordered")(calls)
            _collect(gen, out, report, step)
        return out
    gen = Parallel(n_jobs=width, backend=backend, return_as="generator_unordered")(calls)
    _collect(gen, out, report, step)
    return out


def _collect(gen: Any, out: list[Any], report: Reporter, step: Callable[[int], None]) -> None:
    done = 0
    try:
        for i, value in gen:
            out[i] = value
            done += 1
            step(done)  # raises Cancelled when the user cancels; the rest is abandoned
    finally:
        close = getattr(gen, "close", None)
        if close is not None:
            close()

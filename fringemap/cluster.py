"""Running a batch on a Dask distributed cluster (the optional ``cluster`` extra).

:func:`connect` reaches a running Dask scheduler, waits for a worker and
checks that every worker runs this fringemap version; :func:`run_on_cluster`
sends the colour table to every worker once, then the photos, a few per
worker thread at a time, and hands back each small result as it arrives.
Workers read the photos and write the outputs themselves, so inputs and the
output folder must be on storage that every worker sees under the same
paths. The numbers are those of a local run: the pipeline is deterministic.

Dask is imported only here, and only when a scheduler is given
(``pip install "fringemap[cluster]"``).
"""

from __future__ import annotations

import re
from collections import deque
from collections.abc import Callable

from . import __version__
from .errors import OptionError

__all__ = ["connect", "run_on_cluster", "CONNECT_TIMEOUT_S", "WORKER_WAIT_S"]

#: Seconds to wait for a scheduler to answer.
CONNECT_TIMEOUT_S = 6.0
#: Seconds to wait for the first worker to join a scheduler that has none.
WORKER_WAIT_S = 30.0

_WHERE = "--scheduler"
_ADDRESS = re.compile(r"^(?:(tcp|tls)://)?([^\s/:]+|\[[0-9a-fA-F:]+\]):(\d{1,5})$")


def _one_line(text: object) -> str:
    return " ".join(str(text).split())


def _fringemap_version() -> str:
    """Runs on each worker: the fringemap version it imports."""
    import fringemap

    return fringemap.__version__


def _cluster_task(path: str, stem: str, job, table, camera):
    """Runs on a worker: one photo (``table`` and ``camera`` arrive as worker-held data)."""
    from fringemap.batch import measure_one

    return measure_one(path, stem, job, table=table, camera=camera)


def parse_address(address: str) -> str:
    """``tcp://HOST:PORT`` (or ``HOST:PORT``, taken as tcp) -> the full address.

    Raises
    ------
    OptionError
        Not of that form (``where="--scheduler"``).
    """
    m = _ADDRESS.match(address.strip()) if isinstance(address, str) else None
    if not m or not 0 < int(m.group(3)) < 65536:
        raise OptionError(
            f"expected a Dask scheduler address tcp://HOST:PORT, got {address!r}", where=_WHERE
        )
    return f"{m.group(1) or 'tcp'}://{m.group(2)}:{int(m.group(3))}"


def connect(
    address: str, *, timeout_s: float = CONNECT_TIMEOUT_S, workers_wait_s: float = WORKER_WAIT_S
):
    """A Dask client of the scheduler at ``address``, with at least one fit worker.

    Parameters
    ----------
    address : str
        ``tcp://HOST:PORT`` of a running ``dask scheduler``.
    timeout_s : float
        Seconds to wait for the scheduler to answer.
    workers_wait_s : float
        Seconds to wait for a first worker when none is connected.

    Returns
    -------
    distributed.Client
        Close it when done.

    Raises
    ------
    OptionError
        Dask is not installed, the address is malformed or does not answer,
        no worker joins in time, or a worker cannot import fringemap or runs
        another version (``where="--scheduler"``).
    """
    full = parse_address(address)
    try:
        import distributed
    except ImportError:
        raise OptionError(
            'running on a cluster needs Dask: pip install "fringemap[cluster]"', where=_WHERE
        ) from None
    try:
        client = distributed.Client(full, timeout=timeout_s, set_as_default=False)
    except (OSError, TimeoutError) as exc:
        text = _one_line(exc)
        why = "" if not text or "timed out" in text.lower() else f", {text}"
        raise OptionError(
            f"no Dask scheduler answers at {full} (waited {timeout_s:g} s{why}); start one with "
            "`dask scheduler` or check the address and port",
            where=_WHERE,
        ) from None
    try:
        try:
            client.wait_for_workers(1, timeout=workers_wait_s)
        except TimeoutError:
            raise OptionError(
                f"the scheduler at {full} has no workers after {workers_wait_s:g} s; start some "
                f"with `dask worker {full}`",
                where=_WHERE,
            ) from None
        try:
            versions = client.run(_fringemap_version)
        except Exception as exc:
            raise OptionError(
                f"the workers cannot run fringemap ({type(exc).__name__}: {_one_line(exc)}); "
                f"install fringemap {__version__} on every worker",
                where=_WHERE,
            ) from None
        other = sorted({v for v in versions.values() if v != __version__})
        if other:
            raise OptionError(
                f"workers run fringemap {', '.join(other)}, this is {__version__}; install the "
                "same version everywhere",
                where=_WHERE,
            )
    except BaseException:
        client.close()
        raise
    return client


def run_on_cluster(client, tasks, job, table, camera, done: Callable) -> None:
    """Measure ``tasks`` ((path, stem) pairs) on the cluster; call ``done(outcome)`` for each.

    The colour table (and camera correction) is scattered to every worker
    once; at most two photos per worker thread wait in the cluster at a time,
    so memory stays flat however many photos there are. A photo whose task
    fails on the cluster (e.g. it kept killing workers) is recorded as failed.
    """
    from distributed import as_completed

    from .batch import _crash_outcome

    table_f = client.scatter(table, broadcast=True, hash=False)
    camera_f = None if camera is None else client.scatter(camera, broadcast=True, hash=False)
    window = max(2, 2 * sum(client.nthreads().values()))
    queue = deque(tasks)
    pending: dict = {}
    flow = as_completed(loop=client.loop)

    def submit() -> None:
        path, stem = queue.popleft()
        future = client.submit(
            _cluster_task, path, stem, job, table_f, camera_f, pure=False, retries=0
        )
        pending[future.key] = (path, stem, future)
        flow.add(future)

    try:
        while queue and len(pending) < window:
            submit()
        for future in flow:
            path, stem, _ = pending.pop(future.key)
            if future.status == "finished":
                outcome = future.result()
            else:
                exc = future.exception()
                text = f"failed on the cluster ({type(exc).__name__}: {_one_line(exc)})"
                outcome = _crash_outcome(path, stem, text)
            future.release()
            done(outcome)
            if queue:
                submit()
    except BaseException:
        client.cancel([f for _, _, f in pending.values()])
        raise
    finally:
        client.cancel([table_f] + ([camera_f] if camera_f is not None else []))

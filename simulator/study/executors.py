"""Running a study: :func:`run_study` solves the chunks of a plan in this
process, on a pool of local processes or on a Dask cluster, and stops cleanly
on Ctrl-C or SIGTERM (the command line turns SIGTERM into KeyboardInterrupt).
"""

from __future__ import annotations

import contextlib
import ipaddress
import itertools
import logging
import multiprocessing
import os
import re
import socket
import sys
import time
from collections.abc import Callable

import numpy as np

from ..errors import ClusterError, InputError, SolveError
from ..store.layout import ResultLayout, result_layout
from .plan import Chunk, StudyPlan
from .points import PointConditions
from .progress import Progress, StudySummary
from .run import ChunkResult, SolveSpec, init_worker, keep_model, solve_chunk, solve_chunk_task

__all__ = ["run_study", "check_scheduler_address", "dask_session", "DASK_SCHEMES"]

# the protocols of Dask scheduler addresses (``distributed.comm``); ``inproc`` only
# reaches a scheduler in this same process
DASK_SCHEMES = ("tcp", "tls", "ws", "wss", "ucx", "inproc")
PROBE_SECONDS = 5.0  # [s] wait for a TCP answer from the scheduler's host and port
CONNECT_SECONDS = 20.0  # [s] wait for the Dask handshake once the port answers
# loggers of the distributed library and of the event loop it runs on, kept quiet while a
# study uses a cluster: their reports of a lost connection are screens of traceback; the
# study says what happened in one line instead
QUIET_LOGGERS = ("distributed", "tornado", "asyncio")
_HOST = re.compile(r"^[A-Za-z0-9_](?:[A-Za-z0-9_.-]*[A-Za-z0-9_])?$")


def _default_context():
    """Fork on Linux (workers inherit the loaded model: no start-up cost), spawn
    elsewhere (workers build the model from its text once)."""
    if sys.platform.startswith("linux"):
        return multiprocessing.get_context("fork")
    return multiprocessing.get_context("spawn")


def run_study(plan: StudyPlan, on_result: Callable[[ChunkResult], None], *,
              workers: int = 1, scheduler: str | None = None,
              skip: frozenset[int] | set[int] = frozenset(),
              layout: ResultLayout | None = None,
              progress: Progress | None = None,
              check_limits: bool = True) -> StudySummary:
    """Solve every chunk of ``plan`` not in ``skip``; hand each to ``on_result``.

    Parameters
    ----------
    plan : the study
    on_result : called in this process with each finished chunk, in the order
        chunks finish (writes to the result file)
    workers : local worker processes; 1 solves in this process [-]
    scheduler : address of a Dask scheduler (``"tcp://host:8786"``, checked
        before connecting) or a client already connected (:func:`dask_session`);
        when given, ``workers`` is ignored and the cluster's workers are used
    skip : chunk indices already done (a resumed study)
    layout : result layout (default: :func:`result_layout` of the model)
    progress : progress display (default: none)
    check_limits : ``False`` solves what-ifs beyond valves wide open too (the
        operating-limit checks then mark them ``valves_wide_open``) instead of
        recording them as failed

    Returns
    -------
    StudySummary
        With ``interrupted`` set when Ctrl-C or SIGTERM stopped the run;
        every chunk finished before the stop has been handed to ``on_result``.
    """
    model = plan.case.model
    layout = layout or result_layout(model)
    spec = SolveSpec(model.text, model.file, model.sha256, plan.backend, layout, check_limits,
                     model.fitted)
    keep_model(model)  # inherited by forked workers
    todo = [c for c in plan.chunks if c.index not in skip]
    summary = StudySummary(plan.n_points, n_skipped=sum(c.size for c in plan.chunks
                                                          if c.index in skip))
    t0 = time.perf_counter()

    def handle(res: ChunkResult) -> None:
        on_result(res)
        summary.add(res, plan.labels)
        if progress is not None:
            progress.update(res.stop - res.start, int(np.sum(res.status > 0)))

    try:
        if scheduler:
            summary.where = f"Dask scheduler {_address_of(scheduler)}"
            summary.workers = _run_dask(plan, spec, todo, scheduler, handle)
        elif workers <= 1 or len(todo) <= 1:
            summary.workers = 1
            for c in todo:
                handle(solve_chunk(spec, c, plan.conditions[c.start:c.stop]))
        else:
            n = min(workers, len(todo))
            summary.workers = n
            summary.where = f"{n} local processes"
            _run_pool(plan, spec, todo, n, handle)
    except KeyboardInterrupt:
        summary.interrupted = True
    summary.seconds = time.perf_counter() - t0
    return summary


def _points_of(plan: StudyPlan, c: Chunk):
    """The conditions of chunk ``c`` as the worker gets them: a plan's points as
    numbers (:meth:`~.points.PointConditions.part`; the worker makes them), else a list."""
    if isinstance(plan.conditions, PointConditions):
        return plan.conditions.part(c.start, c.stop)
    return plan.conditions[c.start:c.stop]


def _chunk_of(fut) -> ChunkResult:
    """The result of a chunk's future; a worker that died becomes a clear error."""
    try:
        return fut.result()
    except (KeyboardInterrupt, SolveError):
        raise
    except Exception as exc:  # noqa: BLE001 - a crashed or lost worker process
        raise SolveError(f"a worker stopped without finishing its chunk ({type(exc).__name__}: "
                         f"{exc}); the points finished so far are stored, continue with "
                         f"--resume") from exc


def _run_pool(plan: StudyPlan, spec: SolveSpec, todo: list[Chunk], n: int, handle) -> None:
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    ex = ProcessPoolExecutor(max_workers=n, mp_context=_default_context(),
                             initializer=init_worker, initargs=(spec,))
    pending = set()
    # chunks handled, by index: a handled future is not kept, so that its arrays are
    # freed once written (keeping them held the whole study in memory)
    handled: set[int] = set()
    chunk_of = {}
    # chunks are handed to the pool two per worker at a time (one solving, one
    # waiting), the next as one finishes: the conditions of the others are not made
    # before they are due (the plan keeps them as numbers) and the workers never wait
    queue = iter(todo)

    def submit(k: int) -> None:
        for c in itertools.islice(queue, k):
            fut = ex.submit(solve_chunk_task, spec, c, _points_of(plan, c))
            chunk_of[fut] = c.index
            pending.add(fut)

    try:
        submit(2 * n)  # the first submission forks the workers
        _return_large_blocks()
        while pending:
            done, waiting = wait(pending, return_when=FIRST_COMPLETED)
            pending.clear()
            pending.update(waiting)
            submit(len(done))
            for fut in done:
                handled.add(chunk_of.pop(fut))
                handle(_chunk_of(fut))
            done = fut = None  # no reference to a handled chunk stays
    except KeyboardInterrupt:
        # keep what is finished: let running chunks end, drop the queued ones
        ex.shutdown(wait=True, cancel_futures=True)
        for fut in pending:
            if chunk_of.get(fut) not in handled and fut.done() and not fut.cancelled() \
                    and fut.exception() is None:
                handle(fut.result())
        raise
    finally:
        ex.shutdown(wait=True, cancel_futures=True)


M_MMAP_THRESHOLD = -3  # glibc's mallopt parameter (malloc.h)


def _return_large_blocks() -> None:
    """Have the C heap of this process give every block of 128 KiB or more back to
    the system when it is freed (glibc's ``mallopt(M_MMAP_THRESHOLD)``; nothing
    where the C library has none).

    glibc raises that threshold to the largest block freed so far: after the
    first chunk's pickled result (0.5 MB, read into a buffer and copied) every
    later one came from the heap, which kept their room.  Measured on the demo
    year with two workers: 1 MB less at the study process's peak; the workers,
    forked before, keep glibc's default.
    """
    try:
        import ctypes

        ctypes.CDLL("libc.so.6").mallopt(M_MMAP_THRESHOLD, 128 * 1024)
    except (OSError, AttributeError):  # not glibc
        pass


def _software_version() -> str:
    from ..version import __version__

    return __version__


def check_scheduler_address(address) -> tuple[str, str, str, int | None]:
    """Check the address of a Dask scheduler before connecting to it.

    Parameters
    ----------
    address : ``SCHEME://HOST:PORT`` (``tcp`` when no scheme is written), an
        IPv6 host in brackets, or ``inproc://...`` for a scheduler in this
        process [-]

    Returns
    -------
    tuple
        ``(address, scheme, host, port)``, the address written in full; ``port``
        is ``None`` for ``inproc``.

    Raises
    ------
    InputError
        Naming ``--scheduler`` and what is wrong: no port, a port out of range,
        a protocol Dask does not speak, no host, a host that is not a name.
    """
    def bad(why: str) -> InputError:
        return InputError(f"{address!r} is not a Dask scheduler address: {why}; write "
                          f"SCHEME://HOST:PORT, e.g. tcp://127.0.0.1:8786", key="--scheduler")

    if not isinstance(address, str) or not address.strip():
        raise bad("it is empty")
    text = address.strip()
    if any(ch.isspace() for ch in text):
        raise bad("it contains a space")
    scheme, sep, rest = text.partition("://")
    if not sep:
        scheme, rest = "tcp", text
    scheme = scheme.lower()
    if scheme not in DASK_SCHEMES:
        raise bad(f"{scheme + '://'!r} is not a protocol of Dask "
                  f"({', '.join(DASK_SCHEMES)})")
    if scheme == "inproc":
        if not rest:
            raise bad("inproc:// names no scheduler")
        return f"inproc://{rest}", scheme, rest, None
    if rest.startswith("["):
        host, closed, tail = rest[1:].partition("]")
        if not closed:
            raise bad("the '[' of an IPv6 host is not closed")
        try:
            ipaddress.IPv6Address(host)
        except ValueError:
            raise bad(f"{host!r} is not an IPv6 address") from None
        if tail and not tail.startswith(":"):
            raise bad(f"unexpected {tail!r} after the host")
        port_text = tail[1:] if tail else ""
        shown = f"[{host}]"
    else:
        host, colon, port_text = rest.rpartition(":")
        if not colon:
            host, port_text = rest, ""
        if not host:
            raise bad("no host")
        if not _HOST.match(host):
            raise bad(f"{host!r} is not a host name or IPv4 address")
        shown = host
    if not port_text:
        raise bad("no port")
    if not port_text.isdigit() or not 1 <= int(port_text) <= 65535:
        raise bad(f"the port {port_text!r} is not a whole number from 1 to 65535")
    port = int(port_text)
    return f"{scheme}://{shown}:{port}", scheme, host, port


def _probe(host: str, port: int, address: str) -> None:
    """Fail fast when nothing answers at ``host``:``port`` (a stopped scheduler, a
    wrong port or host) instead of waiting for the Dask handshake's timeout."""
    try:
        with socket.create_connection((host, port), timeout=PROBE_SECONDS):
            pass
    except ConnectionRefusedError:
        why = "the connection was refused: no scheduler listens on that port"
    except socket.gaierror:
        why = f"the host {host!r} is not known"
    except TimeoutError:
        why = f"no answer within {PROBE_SECONDS:g} s"
    except OSError as exc:
        why = exc.strerror or str(exc)
    else:
        return
    raise ClusterError(f"cannot reach the Dask scheduler at {address}: {why}")


@contextlib.contextmanager
def _quiet_logging():
    """Raise the levels of :data:`QUIET_LOGGERS` and their children to CRITICAL while
    the block runs; restore them after."""
    names = [n for n in list(logging.root.manager.loggerDict)
             if n.split(".", 1)[0] in QUIET_LOGGERS] + list(QUIET_LOGGERS)
    saved = {n: logging.getLogger(n).level for n in names}
    try:
        for n in names:
            logging.getLogger(n).setLevel(logging.CRITICAL)
        yield
    finally:
        for n, level in saved.items():
            logging.getLogger(n).setLevel(level)


def _address_of(scheduler) -> str:
    """The address of a scheduler given as an address or as a connected client."""
    if isinstance(scheduler, str):
        return scheduler
    return getattr(getattr(scheduler, "scheduler", None), "address", None) or "(connected)"


@contextlib.contextmanager
def dask_session(scheduler):
    """A Dask client for a study, with the distributed library's logging quiet
    while the block runs.

    Parameters
    ----------
    scheduler : the scheduler's address, checked (:func:`check_scheduler_address`),
        probed and connected here and closed at the end; or a client already
        connected, used and left open [-]

    Raises
    ------
    InputError
        A malformed address, or no ``distributed`` package.
    ClusterError
        Nothing answers at the address, or the Dask handshake fails.
    """
    with _quiet_logging():
        if not isinstance(scheduler, str):
            yield scheduler
            return
        address, scheme, host, port = check_scheduler_address(scheduler)
        try:
            from distributed import Client
        except ImportError:
            raise InputError("a Dask scheduler needs the 'distributed' package; install it "
                             "with pip install 'partload[cluster]'", key="--scheduler") from None
        if scheme in ("tcp", "tls", "ws", "wss"):
            _probe(host, port, address)
        try:
            client = Client(address, timeout=CONNECT_SECONDS, set_as_default=False)
        except Exception as exc:  # noqa: BLE001 - any failure of the handshake
            raise ClusterError(f"cannot connect to the Dask scheduler at {address}: "
                               f"{type(exc).__name__}: {exc}") from None
        try:
            yield client
        finally:
            with contextlib.suppress(Exception):
                client.close(timeout=CONNECT_SECONDS)


def _run_dask(plan: StudyPlan, spec: SolveSpec, todo: list[Chunk], scheduler,
              handle) -> int:
    with dask_session(scheduler) as client:
        address = _address_of(scheduler)
        from distributed import as_completed

        futures = []
        writing = False  # in ``handle``: its errors are the result file's, not the cluster's
        try:
            from ..version import __version__

            versions = client.run(_software_version)
            other = {w: v for w, v in versions.items() if v != __version__}
            if other:
                w, v = next(iter(other.items()))
                raise InputError(f"Dask worker {w} runs partload {v}, this is {__version__}; "
                                 f"install the same version on every worker", key="--scheduler")
            n_workers = len(versions) or 1
            spec_f = client.scatter(spec, broadcast=True, hash=False)
            for c in todo:
                futures.append(client.submit(solve_chunk_task, spec_f, c,
                                             plan.conditions[c.start:c.stop], pure=False,
                                             key=f"partload-chunk-{c.index}-{os.getpid()}-"
                                                 f"{time.time_ns()}"))
            for fut in as_completed(futures, loop=client.loop):
                res = _dask_chunk_of(fut, client, address)
                writing = True
                handle(res)
                writing = False
            return n_workers
        except KeyboardInterrupt:
            with contextlib.suppress(Exception):
                client.cancel(futures)
            raise
        except (InputError, SolveError, ClusterError):
            raise
        except Exception as exc:  # noqa: BLE001 - the connection to the scheduler failed
            if writing:  # the result file could not be made or written (as without Dask)
                raise
            raise _lost(address, exc) from None


def _lost(address: str, exc: BaseException) -> ClusterError:
    text = str(exc)
    why = ("the connection to it broke" if "connection" in text.lower()
           else f"{type(exc).__name__}: {text.splitlines()[0] if text else ''}")
    return ClusterError(f"lost the Dask scheduler at {address} during the study ({why}); "
                        f"the points finished so far are stored, continue with --resume")


def _dask_chunk_of(fut, client, address: str) -> ChunkResult:
    """A chunk's result from the cluster; a lost scheduler is a :class:`ClusterError`,
    a worker that died a :class:`SolveError` (as with local processes)."""
    try:
        return fut.result()
    except (KeyboardInterrupt, SolveError):
        raise
    except Exception as exc:  # noqa: BLE001 - sorted out below
        if getattr(client, "status", "running") != "running" or "connection" in str(exc):
            raise _lost(address, exc) from None
        return _chunk_of(fut)

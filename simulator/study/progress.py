"""Progress of a running study (:class:`Progress`: a bar on a terminal, plain
lines otherwise) and the counts of what a run did (:class:`StudySummary`).
"""

from __future__ import annotations

import math
import sys
import time
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..store.layout import STATUS
from .run import ChunkResult

__all__ = ["Progress", "StudySummary"]


class Progress:
    """Progress of a study: a tqdm bar on a terminal, plain lines otherwise.

    Parameters
    ----------
    total : points in the study [-]
    initial : points already done (a resumed study) [-]
    stream : where to write (default ``sys.stderr``)
    interval : seconds between plain lines [s]
    enabled : ``False`` for silence
    """

    def __init__(self, total: int, initial: int = 0, stream=None, interval: float = 10.0,
                 enabled: bool = True, desc: str = "study"):
        self.total = total
        self.done = initial
        self.initial = initial
        self.failed = 0
        self.stream = stream if stream is not None else sys.stderr
        self.interval = interval
        self.enabled = enabled
        self.desc = desc
        self.t0 = time.monotonic()
        self.t_last = self.t0
        self.bar = None
        self.tty = enabled and getattr(self.stream, "isatty", lambda: False)()

    def _start_bar(self) -> None:
        # made at the first update, after worker processes are forked: tqdm starts a
        # monitor thread, and forking a process with threads is best avoided
        from tqdm import tqdm

        self.bar = tqdm(total=self.total, initial=self.done, unit="pt", desc=self.desc,
                        file=self.stream, dynamic_ncols=True, smoothing=0.1)

    def update(self, points: int, failed: int = 0) -> None:
        if not self.enabled:
            self.done += points
            self.failed += failed
            return
        if self.tty and self.bar is None:
            self._start_bar()
        self.done += points
        self.failed += failed
        if self.bar is not None:
            self.bar.update(points)
            if self.failed:
                self.bar.set_postfix(failed=self.failed, refresh=False)
            return
        now = time.monotonic()
        if now - self.t_last >= self.interval and self.done < self.total:
            self.t_last = now
            self._line(now)

    def _line(self, now: float) -> None:
        new = self.done - self.initial
        rate = new / max(now - self.t0, 1e-9)
        left = (self.total - self.done) / rate if rate > 0 else math.inf
        eta = "" if not math.isfinite(left) else f", about {_duration(left)} left"
        failed = f", {self.failed} failed" if self.failed else ""
        print(f"{self.desc}: {self.done}/{self.total} points "
              f"({100.0 * self.done / max(self.total, 1):.0f} %){failed}, "
              f"{rate:.0f} points/s{eta}", file=self.stream, flush=True)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()
            self.bar = None


def _duration(s: float) -> str:
    s = int(round(s))
    if s < 60:
        return f"{s} s"
    if s < 3600:
        return f"{s // 60} min {s % 60:02d} s"
    return f"{s // 3600} h {(s % 3600) // 60:02d} min"


@dataclass
class StudySummary:
    """What a run of :func:`run_study` did.

    Counts are points [-]; ``failures`` lists ``(index, label, message)`` of
    the first points that failed in this run.
    """

    n_points: int
    n_skipped: int = 0
    n_solved: int = 0
    n_converged: int = 0
    n_failed: int = 0
    n_internal: int = 0
    n_cautions: int = 0
    seconds: float = 0.0
    workers: int = 1
    where: str = "this process"
    interrupted: bool = False
    failures: list = field(default_factory=list)

    def add(self, res: ChunkResult, labels: Sequence[str]) -> None:
        st = res.status
        self.n_solved += len(st)
        self.n_converged += int(np.sum(st == STATUS["converged"]))
        self.n_failed += int(np.sum(st == STATUS["failed"]))
        self.n_internal += int(np.sum(st == STATUS["internal error"]))
        if "cautions/count" in res.arrays:
            self.n_cautions += int(np.sum(res.arrays["cautions/count"] > 0))
        for k in np.flatnonzero(st > 0):
            if len(self.failures) < 20:
                msg = res.arrays["solver/message"][k].decode("utf-8", "replace")
                self.failures.append((res.start + int(k), labels[res.start + int(k)], msg))

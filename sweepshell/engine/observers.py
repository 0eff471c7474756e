"""Progress observers: a bar with rate and ETA on a terminal, plain periodic lines elsewhere.

Both print the address of the dask dashboard of the run's cluster (its plots need ``bokeh``).
"""

from __future__ import annotations

import math
import sys
import time
from typing import Any, Protocol, TextIO

__all__ = ["BarObserver", "LineObserver", "RunObserver", "SilentObserver", "get_observer"]


class RunObserver(Protocol):
    def connected(self, dashboard: str | None) -> None: ...
    def start(self, total: int, done: int, to_compute: int, note: str = "") -> None: ...
    def advance(self, points: int) -> None: ...
    def close(self) -> None: ...


class SilentObserver:
    """Reports nothing (library use, tests)."""

    def connected(self, dashboard: str | None) -> None:
        return None

    def start(self, total: int, done: int, to_compute: int, note: str = "") -> None:
        return None

    def advance(self, points: int) -> None:
        return None

    def close(self) -> None:
        return None


def _fmt_seconds(s: float) -> str:
    if math.isnan(s) or math.isinf(s):
        return "?"
    s = round(s)
    h, rem = divmod(s, 3600)
    m, sec = divmod(rem, 60)
    return f"{h}:{m:02d}:{sec:02d}" if h else f"{m}:{sec:02d}"


def _fmt_rate(rate: float) -> str:
    """``1,234/s``, ``12/s``, ``0.12/s`` (slow models still show a rate)."""
    return f"{rate:,.0f}/s" if rate >= 10 else f"{rate:.2g}/s"


class _Eta:
    """Remaining time from the rate since the first finished block.

    The first block carries the one-off costs (worker start-up, kernel compilation), which
    would make an extrapolated ETA many times too long; until a second block is done there is
    no estimate.
    """

    def __init__(self, to_compute: int) -> None:
        self.to_compute, self.computed = to_compute, 0
        self.first: tuple[float, int] | None = None

    def advance(self, points: int) -> None:
        self.computed += points
        if self.first is None:
            self.first = (time.monotonic(), self.computed)

    def rate(self) -> float:
        if self.first is None:
            return float("nan")
        t1, c1 = self.first
        elapsed = time.monotonic() - t1
        return (self.computed - c1) / elapsed if self.computed > c1 and elapsed > 0 else float("nan")

    def remaining(self) -> float:
        if self.computed >= self.to_compute:
            return 0.0
        rate = self.rate()
        return (self.to_compute - self.computed) / rate if rate > 0 else float("nan")


class LineObserver:
    """Prints one progress line every ``every`` seconds (for logs, pipes and CI)."""

    def __init__(self, stream: TextIO | None = None, every: float = 10.0) -> None:
        self.stream = stream or sys.stderr
        self.every = every

    def connected(self, dashboard: str | None) -> None:
        if dashboard:
            print(f"dask dashboard: {dashboard}", file=self.stream, flush=True)

    def start(self, total: int, done: int, to_compute: int, note: str = "") -> None:
        self.total, self.done, self.to_compute, self.computed = total, done, to_compute, 0
        self.t0 = self.last = time.monotonic()
        self.eta = _Eta(to_compute)
        if note:
            print(note, file=self.stream, flush=True)

    def advance(self, points: int) -> None:
        self.computed += points
        self.eta.advance(points)
        now = time.monotonic()
        if now - self.last >= self.every or self.computed >= self.to_compute:
            self.last = now
            rate = self.eta.rate()
            speed = f"{_fmt_rate(rate)}, " if rate > 0 else ""
            print(f"progress {self.done + self.computed}/{self.total} points ({speed}"
                  f"ETA {_fmt_seconds(self.eta.remaining())})", file=self.stream, flush=True)

    def close(self) -> None:
        return None


class BarObserver:
    """A rich progress bar: points done, rate and ETA."""

    def __init__(self) -> None:
        from rich.progress import (
            BarColumn,
            MofNCompleteColumn,
            Progress,
            TextColumn,
            TimeElapsedColumn,
        )

        self._progress = Progress(
            TextColumn("[bold]sweep"), BarColumn(), MofNCompleteColumn(), TextColumn("points"),
            TextColumn("{task.fields[rate]}"), TimeElapsedColumn(), TextColumn("ETA {task.fields[eta]}"),
            TextColumn("{task.fields[note]}"), transient=False)
        self._task: Any = None

    def connected(self, dashboard: str | None) -> None:
        if dashboard:
            print(f"dask dashboard: {dashboard}", file=sys.stderr, flush=True)

    def start(self, total: int, done: int, to_compute: int, note: str = "") -> None:
        self.eta = _Eta(to_compute)
        self._progress.start()
        self._task = self._progress.add_task("sweep", total=total, completed=done, rate="", eta="?",
                                             note=f"({note})" if note else "")

    def advance(self, points: int) -> None:
        self.eta.advance(points)
        rate = self.eta.rate()
        self._progress.update(self._task, advance=points, rate=_fmt_rate(rate) if rate > 0 else "",
                              eta=_fmt_seconds(self.eta.remaining()), note="")

    def close(self) -> None:
        self._progress.stop()


def get_observer(kind: str = "auto") -> RunObserver:
    """Return ``bar`` on a terminal, ``lines`` otherwise (``auto``), or ``none``."""
    if kind == "none":
        return SilentObserver()
    if kind == "bar" or (kind == "auto" and sys.stderr.isatty()):
        return BarObserver()
    return LineObserver()

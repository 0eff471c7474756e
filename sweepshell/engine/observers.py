"""Progress observers: a bar with rate and ETA on a terminal, plain periodic lines elsewhere."""

from __future__ import annotations

import math
import sys
import time
from typing import Any, Protocol, TextIO

__all__ = ["BarObserver", "LineObserver", "RunObserver", "SilentObserver", "get_observer"]


class RunObserver(Protocol):
    def start(self, total: int, done: int, to_compute: int) -> None: ...
    def advance(self, points: int) -> None: ...
    def close(self) -> None: ...


class SilentObserver:
    """Reports nothing (library use, tests)."""

    def start(self, total: int, done: int, to_compute: int) -> None:
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


class LineObserver:
    """Prints one progress line every ``every`` seconds (for logs, pipes and CI)."""

    def __init__(self, stream: TextIO | None = None, every: float = 10.0) -> None:
        self.stream = stream or sys.stderr
        self.every = every

    def start(self, total: int, done: int, to_compute: int) -> None:
        self.total, self.done, self.to_compute, self.computed = total, done, to_compute, 0
        self.t0 = self.last = time.monotonic()

    def advance(self, points: int) -> None:
        self.computed += points
        now = time.monotonic()
        if now - self.last >= self.every or self.computed >= self.to_compute:
            self.last = now
            rate = self.computed / max(now - self.t0, 1e-9)
            eta = (self.to_compute - self.computed) / rate if rate > 0 else float("inf")
            print(f"progress {self.done + self.computed}/{self.total} points ({rate:.0f}/s, "
                  f"ETA {_fmt_seconds(eta)})", file=self.stream, flush=True)

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
            TimeRemainingColumn,
        )

        self._progress = Progress(
            TextColumn("[bold]sweep"), BarColumn(), MofNCompleteColumn(), TextColumn("points"),
            TextColumn("{task.fields[rate]}"), TimeElapsedColumn(), TextColumn("ETA"), TimeRemainingColumn(),
            transient=False)
        self._task: Any = None

    def start(self, total: int, done: int, to_compute: int) -> None:
        self.t0 = time.monotonic()
        self.computed = 0
        self._progress.start()
        self._task = self._progress.add_task("sweep", total=total, completed=done, rate="")

    def advance(self, points: int) -> None:
        self.computed += points
        rate = self.computed / max(time.monotonic() - self.t0, 1e-9)
        self._progress.update(self._task, advance=points, rate=f"{rate:,.0f}/s")

    def close(self) -> None:
        self._progress.stop()


def get_observer(kind: str = "auto") -> RunObserver:
    """Return ``bar`` on a terminal, ``lines`` otherwise (``auto``), or ``none``."""
    if kind == "none":
        return SilentObserver()
    if kind == "bar" or (kind == "auto" and sys.stderr.isatty()):
        return BarObserver()
    return LineObserver()

"""Progress: the ETA leaves out the first block's one-off costs, and says when kernels compile."""

from __future__ import annotations

import io

from sweepshell.engine import observers
from sweepshell.engine.observers import LineObserver
from sweepshell.models import get_model


class Clock:
    def __init__(self) -> None:
        self.now = 0.0

    def monotonic(self) -> float:
        return self.now


def test_eta_comes_from_the_blocks_after_the_first(monkeypatch):
    clock = Clock()
    monkeypatch.setattr(observers.time, "monotonic", clock.monotonic)
    stream = io.StringIO()
    observer = LineObserver(stream, every=0.0)
    observer.start(1000, 0, 1000, note="compiling the model's kernels (once)")
    clock.now = 60.0  # the first block: a minute of start-up and compilation for 100 points
    observer.advance(100)
    clock.now = 70.0  # then 100 points in 10 s
    observer.advance(100)
    lines = stream.getvalue().splitlines()
    assert lines[0] == "compiling the model's kernels (once)"
    assert lines[1] == "progress 100/1000 points (ETA ?)"  # one block says nothing of the rate
    assert lines[2] == "progress 200/1000 points (10/s, ETA 1:20)"  # 800 points at 10/s, not 8:00


def test_only_compiled_models_announce_compilation():
    assert get_model("winkler_column").kernels_to_compile() is False
    assert isinstance(get_model("shallow_cap").kernels_to_compile(), bool)

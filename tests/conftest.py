"""Shared fixtures: strict floating point, a seeded rng, Agg plots, sweeps in a temporary folder."""

from __future__ import annotations

import os

# one BLAS thread, set before numpy loads: the suite runs in one process on small matrices, where
# OpenBLAS threads on a shared 2-core machine made single tests up to 10x slower
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("MPLBACKEND", "Agg")

import textwrap
from pathlib import Path

import numpy as np
import pytest

REPO = Path(__file__).resolve().parents[1]
CONFIGS = REPO / "configs"


@pytest.fixture(autouse=True)
def _strict_floats():
    old = np.seterr(all="raise", under="ignore")
    yield
    np.seterr(**old)


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20261202)


@pytest.fixture
def workdir(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """A temporary working folder (stores go to its results/) with the project's configs."""
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("SWEEPSHELL_CONFIG_DIR", str(CONFIGS))
    return tmp_path


def write_sweep(folder: Path, text: str, name: str = "sweep.yaml") -> Path:
    """Write a sweep YAML file (dedented) and return its path."""
    path = folder / name
    path.write_text(textwrap.dedent(text))
    return path


COLUMN_SWEEP = """\
name: column
model: winkler_column
fixed: {end: pinned}
axes:
  stiffness_ratio: {logspace: [-1, 3, 20]}
  load_ratio: {linspace: [0.5, 40, 15]}
executor: {kind: threads, workers: 2}
block: {points: 40}
"""

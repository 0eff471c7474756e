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


EXAMPLES = REPO / "examples"
RING_PLUGIN = EXAMPLES / "elastic_ring_plugin"


def pip_install_target(source: Path, target: Path) -> Path:
    """Install ``source`` (a project folder or a wheel) without dependencies into ``target``; return ``target``.

    The test venv already holds every dependency, so putting ``target`` first on ``PYTHONPATH`` gives a
    subprocess the installed package (and its entry points, read from the dist-info) without a second venv.
    """
    import subprocess
    import sys

    proc = subprocess.run([sys.executable, "-m", "pip", "install", "--quiet", "--no-deps", "--no-compile",
                           "--disable-pip-version-check", "--target", str(target), str(source)],
                          capture_output=True, text=True, timeout=600, check=False)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    return target


def subprocess_env(*paths: Path) -> dict[str, str]:
    """Environment for a ``python -m sweepshell`` subprocess: ``paths`` first on ``PYTHONPATH``, no config override."""
    env = {k: v for k, v in os.environ.items() if k != "SWEEPSHELL_CONFIG_DIR"}
    parts = [str(p) for p in paths] + ([env["PYTHONPATH"]] if env.get("PYTHONPATH") else [])
    env["PYTHONPATH"] = os.pathsep.join(parts)
    env["MPLBACKEND"] = "Agg"
    return env


@pytest.fixture(scope="session")
def ring_plugin_site(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A folder holding the installed example plug-in ``fenwick-rings`` (put it on ``PYTHONPATH``)."""
    return pip_install_target(RING_PLUGIN, tmp_path_factory.mktemp("plugin-site"))

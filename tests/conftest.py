"""Shared fixtures and helpers: strict floating point, a seeded rng, Agg plots, sweeps in a temporary
folder, small stores of the analytic ``winkler_column`` model, and model inputs with defaults filled in.

Stores built by session-scoped fixtures are shared between test modules: tests must only read them
(a test that writes into a store takes the function-scoped ``store`` fixture, a fresh copy).
"""

from __future__ import annotations

import os

# one BLAS thread, set before numpy loads: the suite runs in one process on small matrices, where
# OpenBLAS threads on a shared 2-core machine made single tests up to 10x slower
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("MPLBACKEND", "Agg")

import textwrap
from collections.abc import Sequence
from pathlib import Path
from typing import Any

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
block: {points: 40}
"""

#: a three-axis column sweep (one named axis): boundaries on a view, the report
THREE_AXES = """\
name: column3
model: winkler_column
axes:
  stiffness_ratio: {logspace: [-1, 3, 13]}
  load_ratio: {linspace: [0.5, 40, 11]}
  end: [pinned, weak]
"""

#: the same three axes on a finer grid: regime maps and line plots
THREE_AXES_FINE = """\
name: column3
model: winkler_column
axes:
  stiffness_ratio: {logspace: [-1, 3, 21]}
  load_ratio: {linspace: [0.5, 40, 16]}
  end: [pinned, weak]
"""

#: a few failed and outside-validity points (load_ratio == 0.5 fails; eta > 500 is outside)
FAULTY_OVERRIDES = ("+settings.fail_at=0.5", "settings.validity_limit=500")


def compute_column_store(folder: Path, name: str = "column", overrides: Sequence[str] = (),
                         sweep_text: str = COLUMN_SWEEP) -> Path:
    """Compute a small column sweep into ``folder/<name>.zarr`` in this process; return the store path.

    Blocks are computed without a dask cluster, which keeps each store under a few tenths of a
    second; the engine's own tests cover the cluster path.
    """
    from sweepshell.config.loader import load_plan
    from sweepshell.engine.runner import prepare_store
    from sweepshell.engine.worker import compute_block
    from sweepshell.plan import iter_blocks

    folder.mkdir(parents=True, exist_ok=True)
    sweep = write_sweep(folder, sweep_text, name=f"{name}.yaml")
    store = folder / f"{name}.zarr"
    plan = load_plan(str(sweep), [f"store.path={store}", *overrides], config_dir=str(CONFIGS))
    block_shape, _ = prepare_store(plan)
    values = [a.to_array() for a in plan.axes]
    for block in iter_blocks(plan.shape, block_shape):
        compute_block(str(store), plan.model, plan.settings, plan.axis_names,
                      [v[s] for v, s in zip(values, block.slices, strict=True)], plan.fixed, block)
    return store


def run_column_store(path: Path, stiffness_ratio: list[Any], load_ratio: list[Any], *,
                     settings: dict[str, Any] | None = None, fixed: dict[str, Any] | None = None,
                     block_points: int = 10, name: str = "column", reuse: bool = False) -> Path:
    """Run the cheap winkler_column model over a grid into ``path`` (in this process); return the path.

    Used by the store tests (catalog, merge, verify) and the CLI tests. Reuse of points from
    sibling stores is off by default, so every store is an independent computation (a
    reference to compare a merge against must not be a copy of its sources).
    """
    from sweepshell import run_sweep
    from sweepshell.config.loader import build_plan

    plan = build_plan({"name": name, "model": "winkler_column", "settings": settings or {},
                       "fixed": fixed if fixed is not None else {"end": "pinned"},
                       "axes": {"stiffness_ratio": stiffness_ratio, "load_ratio": load_ratio},
                       "store": {"path": str(path)},
                       "block": {"points": block_points}, "reuse": reuse})
    summary = run_sweep(plan)
    assert summary.complete and summary.computed == summary.total
    return path


@pytest.fixture
def store(tmp_path: Path) -> Path:
    """A fresh column store (``COLUMN_SWEEP``) that the test may write into."""
    return compute_column_store(tmp_path)


@pytest.fixture(scope="session")
def column_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The column store of ``COLUMN_SWEEP``, shared: read only."""
    return compute_column_store(tmp_path_factory.mktemp("column"))


@pytest.fixture(scope="session")
def three_axis_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """``THREE_AXES`` with ``FAULTY_OVERRIDES``, shared: read only."""
    return compute_column_store(tmp_path_factory.mktemp("three"), "column3", FAULTY_OVERRIDES,
                                sweep_text=THREE_AXES)


@pytest.fixture(scope="session")
def three_axis_fine_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """``THREE_AXES_FINE`` with ``FAULTY_OVERRIDES``, shared: read only."""
    return compute_column_store(tmp_path_factory.mktemp("three_fine"), "column3", FAULTY_OVERRIDES,
                                sweep_text=THREE_AXES_FINE)


def model_inputs(model: Any, **columns: Any) -> dict[str, np.ndarray]:
    """Return ``solve_batch`` inputs of a model: every parameter at its default, then ``columns``.

    Columns (arrays or scalars) broadcast to the longest one; categorical parameters come as
    ``str`` arrays and the others as float64, as the engine passes them.
    """
    n = max([np.size(v) for v in columns.values()] + [1])
    out = {}
    for p in model.parameters:
        value = columns.get(p.name, p.default)
        if p.is_categorical:
            out[p.name] = np.broadcast_to(np.asarray(value).astype(str), (n,)).copy()
        else:
            out[p.name] = np.broadcast_to(np.asarray(np.nan if value is None else value, dtype=np.float64),
                                          (n,)).copy()
    return out


def cap_inputs(lam: Any, **columns: Any) -> dict[str, np.ndarray]:
    """Return ``shallow_cap`` inputs at shell parameters ``lam``, the other parameters at their defaults."""
    from sweepshell.models.shallow_cap.model import ShallowCapModel

    return model_inputs(ShallowCapModel, shell_parameter=np.atleast_1d(np.asarray(lam, dtype=float)), **columns)


@pytest.fixture(scope="session")
def shape_stores(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """Read-only synthetic stores of the shape view: ``cap`` (height fields), ``strip`` (sections), ``plain`` (none)."""
    from tests.plot.shape_stores import make_cap_store, make_plain_store, make_strip_store

    folder = tmp_path_factory.mktemp("shapes")
    return {"cap": make_cap_store(folder), "strip": make_strip_store(folder), "plain": make_plain_store(folder)}

EXAMPLES = REPO / "examples"
RING_PLUGIN = EXAMPLES / "elastic_ring_plugin"


def subprocess_env(*paths: Path) -> dict[str, str]:
    """Environment for a ``python -m sweepshell`` subprocess: ``paths`` first on ``PYTHONPATH``, no config override."""
    env = {k: v for k, v in os.environ.items() if k != "SWEEPSHELL_CONFIG_DIR"}
    parts = [str(p) for p in paths] + ([env["PYTHONPATH"]] if env.get("PYTHONPATH") else [])
    env["PYTHONPATH"] = os.pathsep.join(parts)
    env["MPLBACKEND"] = "Agg"
    return env


@pytest.fixture(scope="session")
def ring_plugin_wheel(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The built wheel of the example plug-in ``fenwick-rings`` (``examples/elastic_ring_plugin``)."""
    from tests.venvs import build_wheel

    return build_wheel(RING_PLUGIN, tmp_path_factory.mktemp("plugin-wheel"))


@pytest.fixture(scope="session")
def ring_plugin_python(tmp_path_factory: pytest.TempPathFactory, ring_plugin_wheel: Path) -> Path:
    """``python`` of a fresh virtual environment with ``fenwick-rings`` installed (tests leave it installed)."""
    from tests.venvs import install, make_venv

    python = make_venv(tmp_path_factory.mktemp("plugin-venv") / "venv")
    install(python, ring_plugin_wheel)
    return python


#: a 4 x 3 column grid in blocks of 3 (one per stiffness): the small store the fault and hostile-input tests damage
SMALL_COLUMN_ETA = [0.1, 1.0, 10.0, 100.0]
SMALL_COLUMN_LOAD = [0.5, 5.0, 40.0]
SMALL_COLUMN_STORE = "results/column.zarr"
SMALL_COLUMN_SWEEP = """\
name: column
model: winkler_column
fixed: {end: pinned}
axes:
  stiffness_ratio: [0.1, 1.0, 10.0, 100.0]
  load_ratio: [0.5, 5.0, 40.0]
store: {path: results/column.zarr}
block: {points: 3}
reuse: false
"""


@pytest.fixture(scope="session")
def s3_server() -> Any:
    """A local S3-compatible server (moto) on 127.0.0.1 at a free port, for the object-store tests.

    Sets the standard AWS environment variables (test credentials, region, ``AWS_ENDPOINT_URL``) so that
    this process, CLI subprocesses and dask workers reach it without any option; restores them at the end.
    Yields the endpoint URL. Skips (with the reason) when the server cannot start.
    """
    try:
        import s3fs  # noqa: F401
        from moto.server import ThreadedMotoServer
    except ImportError as exc:
        pytest.skip(f"object-store tests need s3fs and moto[server] (pip install -e '.[test]'): {exc}")
    import logging

    logging.getLogger("werkzeug").setLevel(logging.ERROR)  # one access line per request otherwise
    server = ThreadedMotoServer(ip_address="127.0.0.1", port=0, verbose=False)
    try:
        server.start()
        host, port = server.get_host_and_port()
    except Exception as exc:  # pragma: no cover - depends on the machine
        pytest.skip(f"the local S3 server (moto) could not start: {exc}")
    endpoint = f"http://{host}:{port}"
    env = {"AWS_ACCESS_KEY_ID": "sweepshell-test", "AWS_SECRET_ACCESS_KEY": "sweepshell-test-secret",
           "AWS_DEFAULT_REGION": "us-east-1", "AWS_ENDPOINT_URL": endpoint}
    saved = {k: os.environ.get(k) for k in env}
    os.environ.update(env)
    try:
        yield endpoint
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v
        server.stop()


@pytest.fixture
def s3_bucket(s3_server: str) -> str:
    """A fresh, empty bucket on the local S3 server; returns ``s3://NAME``."""
    import uuid

    import s3fs

    name = f"sweepshell-{uuid.uuid4().hex[:12]}"
    s3fs.S3FileSystem(endpoint_url=s3_server, skip_instance_cache=True).mkdir(name)
    return f"s3://{name}"

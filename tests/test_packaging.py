"""Packaging: the wheel runs a packaged sweep from an empty folder; lower bounds and the version have one source."""

from __future__ import annotations

import os
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

import sweepshell
from tests.conftest import REPO, pip_install_target, subprocess_env


def _pyproject() -> dict:
    return tomllib.loads((REPO / "pyproject.toml").read_text())


@pytest.mark.slow  # builds the wheel and runs a sweep in a fresh install (numba compiles there once)
def test_wheel_runs_a_packaged_sweep_from_an_empty_folder(tmp_path):
    wheels = tmp_path / "wheels"
    build = subprocess.run([sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", "--no-cache-dir",
                            "--disable-pip-version-check", "-w", str(wheels), str(REPO)],
                           capture_output=True, text=True, timeout=600, check=False)
    assert build.returncode == 0, build.stdout + build.stderr
    (wheel,) = wheels.glob("sweepshell-*.whl")
    assert wheel.name.startswith(f"sweepshell-{sweepshell.__version__}-")
    site = pip_install_target(wheel, tmp_path / "site")
    assert (site / "sweepshell" / "py.typed").is_file()
    assert (site / "sweepshell" / "_configs" / "sweep" / "dome_dimple_map.yaml").is_file()
    empty = tmp_path / "elsewhere"
    empty.mkdir()
    env = subprocess_env(site)
    env["PYTHONPATH"] = str(site)  # the wheel's package only, not the checkout
    where = subprocess.run([sys.executable, "-c", "import sweepshell; print(sweepshell.__file__)"], cwd=empty,
                           env=env, capture_output=True, text=True, timeout=120, check=False)
    assert where.stdout.strip() == str(site / "sweepshell" / "__init__.py"), where.stderr
    run = subprocess.run([sys.executable, "-m", "sweepshell", "run", "dome_dimple_map", "--progress", "none",
                          "axes.shell_parameter=[4.0,8.0]", "axes.dimple_amplitude=[0.01]", "executor=threads"],
                         cwd=empty, env=env, capture_output=True, text=True, timeout=900, check=False)
    assert run.returncode == 0, run.stderr
    assert "2 ok" in run.stdout
    assert (empty / "results" / "dome_dimple_map.zarr" / "zarr.json").is_file()
    assert sorted(p.name for p in empty.iterdir()) == ["results"]


def test_lowest_constraints_equal_the_declared_lower_bounds():
    project = _pyproject()["project"]
    declared = {}
    for req in [*project["dependencies"], *project["optional-dependencies"]["test"]]:
        m = re.match(r"^([A-Za-z0-9_.-]+)>=([0-9][0-9.]*)", req)
        if m:
            declared[m.group(1).lower()] = m.group(2)
    pinned = {}
    for line in (REPO / ".ci" / "lowest-constraints.txt").read_text().splitlines():
        if line.strip() and not line.startswith("#"):
            name, version = line.split("==")
            pinned[name.strip().lower()] = version.strip()

    def norm(v: str) -> tuple[int, ...]:
        parts = [int(x) for x in v.split(".")]
        while parts and parts[-1] == 0:
            parts.pop()
        return tuple(parts)

    unpinned = sorted(set(declared) - set(pinned) - {"ruff", "mypy"})  # linters: newest, not lowest
    assert not unpinned, f"lower bounds without a line in .ci/lowest-constraints.txt: {unpinned}"
    for name, version in pinned.items():
        assert name in declared, f"{name} is pinned in .ci/lowest-constraints.txt but not declared"
        assert norm(version) == norm(declared[name]), f"{name}: constraints {version}, pyproject {declared[name]}"


def test_one_version_and_a_hydra_range():
    project = _pyproject()
    assert "version" in project["project"]["dynamic"] and "version" not in project["project"]
    assert project["tool"]["setuptools"]["dynamic"]["version"]["attr"].endswith("__version__")
    hydra = [d for d in project["project"]["dependencies"] if d.startswith("hydra-core")]
    assert hydra and "==" not in hydra[0] and "<" in hydra[0]
    assert (Path(sweepshell.__file__).parent / "py.typed").is_file()


def test_packaged_configs_mirror_the_configs_folder():
    from sweepshell.config.loader import _packaged_config_dir

    packaged = _packaged_config_dir()
    assert packaged is not None
    def yaml_files(root: Path) -> list[str]:
        return sorted(Path(folder, f).relative_to(root).as_posix() for folder, _, files in
                      os.walk(root, followlinks=True) for f in files if f.endswith(".yaml"))

    assert yaml_files(REPO / "configs") == yaml_files(packaged)
    assert "sweep/dome_dimple_map.yaml" in yaml_files(packaged)

"""The scenario scripts in examples/ run as written and print their headline numbers."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

from tests.conftest import EXAMPLES, subprocess_env

pytestmark = pytest.mark.slow  # each runs a small sweep in a fresh process


def _run(script: str, cwd: Path, *paths: Path) -> str:
    proc = subprocess.run([sys.executable, str(EXAMPLES / script)], cwd=cwd, env=subprocess_env(*paths),
                          capture_output=True, text=True, timeout=600, check=False)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    return proc.stdout


def _number(pattern: str, text: str) -> float:
    match = re.search(pattern, text)
    assert match, f"{pattern!r} not in output:\n{text}"
    return float(match.group(1))


def test_dome_study(tmp_path):
    out = _run("dome_study.py", tmp_path)
    # clamped perfect cap at lambda = 4 snaps axisymmetrically at 0.5-0.65 p_cl (Huang 1964, value from memory;
    # pinned down in tests/reference/test_shallow_cap_reference.py)
    assert 0.5 < _number(r"perfect lambda=4 dome snaps at p/p_cl = ([0-9.]+)", out) < 0.65
    assert _number(r"dent at lambda=8 keeps ([0-9.]+)%", out) < 80.0  # a dent of half the thickness costs
    assert "Caution" in out and (tmp_path / "results" / "harlow_domes.zarr").is_dir()


def test_film_study(tmp_path):
    out = _run("film_study.py", tmp_path)
    # stiff film on a half-space: wavelength 2 pi h (Ef/(3 Es))^(1/3), critical strain (1/4)(3 Es/Ef)^(2/3) with
    # plane-strain moduli (Chen & Hutchinson 2004; Huang, Hong & Suo 2005)
    ef, es = 2.0e9 / (1 - 0.3**2), 1.5e6 / (1 - 0.48**2)
    wavelength = 2 * 3.141592653589793 * 0.2 * (ef / (3 * es)) ** (1 / 3)  # micrometres
    assert _number(r"critical wavelength ([0-9.]+) um", out) == pytest.approx(wavelength, abs=1e-3)
    assert _number(r"critical strain ([0-9.]+)", out) == pytest.approx(0.25 * (3 * es / ef) ** (2 / 3), abs=1e-5)
    assert (tmp_path / "orrin_film.png").stat().st_size > 10_000


def test_plugin_sweep(tmp_path, ring_plugin_site):
    out = _run("plugin_sweep.py", tmp_path, ring_plugin_site)
    assert "model from package fenwick-rings 1.0.0" in out
    # long tube: p_cr = E/(4(1-nu^2)) (t/R)^3 (Bryan 1888; Timoshenko & Gere 1961, Sec. 7.4)
    expected = 1.0e9 / (4 * (1 - 0.45**2)) * (0.01 / 0.5) ** 3
    assert _number(r"ungrouted 10 mm liner buckles at ([0-9.]+) Pa", out) == pytest.approx(expected, abs=0.05)
    assert "Caution" in out

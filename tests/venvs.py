"""Fresh virtual environments for the packaging and plug-in tests: real ``pip install`` and ``pip uninstall``.

A new environment made with ``venv --without-pip`` takes a fraction of a second; one ``.pth`` file hands it the
running environment's site-packages (with their own ``.pth`` hooks, such as an editable install of sweepshell)
after its own. What ``pip`` installs there comes first on ``sys.path`` and lands in the new environment only,
with its console scripts and its dist-info (so its entry points); the dependencies come from the running
environment and nothing is downloaded. The running environment is never changed (``--ignore-installed``).
"""

from __future__ import annotations

import site
import subprocess
import sys
from pathlib import Path


def make_venv(path: Path) -> Path:
    """Create a fresh virtual environment at ``path`` layered on the running one; return its ``python``."""
    subprocess.run([sys.executable, "-m", "venv", "--without-pip", str(path)], capture_output=True, timeout=120,
                   check=True)
    python = path / "bin" / "python"
    purelib = subprocess.run([str(python), "-c", "import sysconfig; print(sysconfig.get_path('purelib'))"],
                             capture_output=True, text=True, timeout=120, check=True).stdout.strip()
    hooks = "".join(f"import site; site.addsitedir({p!r})\n" for p in site.getsitepackages())
    Path(purelib, "zz_running_environment.pth").write_text(hooks)
    return python


def pip(python: Path, *args: str) -> str:
    """Run ``python -m pip ARGS`` in that environment; fail the test with pip's output if it fails."""
    proc = subprocess.run([str(python), "-m", "pip", *args, "--quiet", "--disable-pip-version-check"],
                          capture_output=True, text=True, timeout=600, check=False)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    return proc.stdout


def install(python: Path, wheel: Path) -> None:
    """Install ``wheel`` without dependencies into that environment (never touching the running one)."""
    pip(python, "install", "--no-deps", "--ignore-installed", "--no-compile", str(wheel))


def build_wheel(source: Path, out: Path) -> Path:
    """Build the wheel of the project in ``source`` into ``out``; return its path."""
    pip(Path(sys.executable), "wheel", "--no-deps", "--no-cache-dir", "-w", str(out), str(source))
    (wheel,) = out.glob("*.whl")
    return wheel

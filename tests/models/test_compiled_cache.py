"""Compiled kernels find a cache folder when the installed package folder is read-only."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import pytest

from sweepshell.models import compiled_cache
from sweepshell.models.compiled_cache import choose_compiled_cache


@pytest.fixture
def unwritable(tmp_path: Path) -> Path:
    """A folder below a regular file: nothing can be created there, even by root (unlike chmod)."""
    blocker = tmp_path / "file"
    blocker.write_text("")
    return blocker / "below"


def test_numba_finds_its_own_place(tmp_path: Path, unwritable: Path) -> None:
    assert choose_compiled_cache(tmp_path / "pkg", {}) is None  # next to the source
    assert choose_compiled_cache(unwritable, {"XDG_CACHE_HOME": str(tmp_path / "cache")}) is None  # user cache
    assert choose_compiled_cache(unwritable, {"HOME": str(tmp_path)}) is None
    assert choose_compiled_cache(unwritable, {"NUMBA_CACHE_DIR": str(unwritable)}) is None  # the user's choice


def test_read_only_install_without_user_cache_gets_a_private_folder(tmp_path: Path, unwritable: Path,
                                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    folder = choose_compiled_cache(unwritable, {"HOME": str(unwritable)})
    assert folder == str(tmp_path / f"sweepshell-numba-{os.getuid()}")
    assert Path(folder).stat().st_mode & 0o077 == 0
    assert choose_compiled_cache(unwritable, {"HOME": str(unwritable)}) == folder  # later processes share it


def test_a_folder_others_may_write_is_never_used(tmp_path: Path, unwritable: Path,
                                                 monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    planted = tmp_path / f"sweepshell-numba-{os.getuid()}"
    planted.mkdir()
    planted.chmod(0o777)  # numba's cache files are pickles: someone else's folder could hold anything
    folder = choose_compiled_cache(unwritable, {"HOME": str(unwritable)})
    assert folder is not None and Path(folder) != planted and Path(folder).parent == tmp_path
    assert Path(folder).stat().st_mode & 0o077 == 0


def test_ensure_sets_the_variable_for_workers(unwritable: Path, tmp_path: Path,
                                              monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    monkeypatch.setenv("HOME", str(unwritable))
    monkeypatch.delenv("XDG_CACHE_HOME", raising=False)
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    numba_config = pytest.importorskip("numba.core.config")
    monkeypatch.setattr(numba_config, "CACHE_DIR", numba_config.CACHE_DIR)
    compiled_cache.ensure_compiled_cache(unwritable)
    assert os.environ["NUMBA_CACHE_DIR"] == numba_config.CACHE_DIR == str(tmp_path / f"sweepshell-numba-{os.getuid()}")

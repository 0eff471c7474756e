"""The catalog's index file: an SQLite cache of store summaries keyed on file fingerprints.

The index is never trusted (see :mod:`sweepshell.store.catalog`): a file that is not our
index is rebuilt, a cached record is used only when it parses as plain JSON of exactly the
expected shape, and a locked or unreadable index means listing without one.
"""

from __future__ import annotations

import json
import logging
import sqlite3
from pathlib import Path
from typing import Any

__all__ = ["open_index", "parse_record", "read_cached", "update_index"]

log = logging.getLogger("sweepshell.store.catalog")

#: marks the SQLite file as ours ("SWPC"); anything else is rebuilt
_APPLICATION_ID = 0x53575043
#: version of the index tables below; another version is rebuilt
_INDEX_VERSION = 1
#: how long to wait for another process holding the index, s
_LOCK_TIMEOUT_SECONDS = 10.0


_ENTRY_TYPES: dict[str, tuple[type, ...]] = {
    "path": (str,), "sweep": (str, type(None)), "model": (str, type(None)), "model_version": (str, type(None)),
    "settings_json": (str, type(None)), "fixed_json": (str, type(None)), "axes": (list,), "total": (int,),
    "counts": (dict,), "bytes_on_disk": (int,), "created": (str, type(None)), "updated": (str, type(None)),
    "problem": (str, type(None)),
}


def parse_record(text: str, rel: str) -> dict[str, Any] | None:
    """Parse a cached record; ``None`` unless it is plain JSON of exactly the expected shape."""
    try:
        data = json.loads(text)
    except (TypeError, ValueError):
        return None
    if not isinstance(data, dict) or set(data) != set(_ENTRY_TYPES) or data.get("path") != rel:
        return None
    for key, types in _ENTRY_TYPES.items():
        if not isinstance(data[key], types) or isinstance(data[key], bool):
            return None
    if not all(isinstance(k, str) and isinstance(v, int) for k, v in data["counts"].items()):
        return None
    if not all(isinstance(a, dict) for a in data["axes"]):
        return None
    return data


def open_index(path: Path) -> tuple[sqlite3.Connection | None, bool]:
    """Open (or create) the index and say whether it was (re)built; ``None`` when unusable.

    Anything that is not our index is deleted and recreated.
    """
    try:
        return _open_index(path)
    except sqlite3.Error as exc:
        log.warning("catalog index %s unusable (%s); listing without it", path, exc)
        return None, False


def _open_index(path: Path) -> tuple[sqlite3.Connection | None, bool]:
    existed = path.exists()
    for attempt in range(2):
        try:
            con = sqlite3.connect(str(path), timeout=_LOCK_TIMEOUT_SECONDS)
            app_id = con.execute("PRAGMA application_id").fetchone()[0]
            version = con.execute("PRAGMA user_version").fetchone()[0]
            tables = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='table'")}
            if app_id == _APPLICATION_ID and version == _INDEX_VERSION and tables == {"stores"}:
                return con, False
            if app_id == 0 and version == 0 and not tables:  # a fresh, empty database
                with con:
                    con.execute(f"PRAGMA application_id={_APPLICATION_ID}")
                    con.execute(f"PRAGMA user_version={_INDEX_VERSION}")
                    con.execute("CREATE TABLE stores (path TEXT PRIMARY KEY, fingerprint TEXT NOT NULL, "
                                "record TEXT NOT NULL)")
                return con, existed
            con.close()
            reason = "foreign or outdated"
        except sqlite3.OperationalError as exc:
            # locked by another process, or not openable here: use no index rather than delete a good one
            log.warning("catalog index %s is busy or cannot be opened (%s); listing without it", path, exc)
            return None, False
        except sqlite3.DatabaseError as exc:  # "file is not a database": garbage in our file name
            reason = f"unreadable ({exc})"
        except OSError as exc:
            log.warning("catalog index %s cannot be opened (%s); listing without an index", path, exc)
            return None, False
        if attempt:
            break
        log.warning("catalog index %s is %s; rebuilding it from the stores", path, reason)
        try:
            path.unlink()
        except FileNotFoundError:
            pass
        except OSError as exc:
            log.warning("cannot remove %s (%s); listing without an index", path, exc)
            return None, False
        existed = True
    return None, False


def read_cached(con: sqlite3.Connection | None) -> dict[str, tuple[str, str]]:
    """Return the cached (fingerprint, record) per store path; empty without a usable index."""
    if con is None:
        return {}
    try:
        return {r[0]: (r[1], r[2]) for r in con.execute("SELECT path, fingerprint, record FROM stores")}
    except sqlite3.Error:
        return {}


def update_index(con: sqlite3.Connection, index_path: Path, fresh: list[tuple[str, str, str]],
                 gone: set[str]) -> None:
    """Store the fresh (path, fingerprint, record) rows, drop the stores that are gone, close the index."""
    try:
        with con:
            con.executemany("INSERT OR REPLACE INTO stores (path, fingerprint, record) VALUES (?, ?, ?)", fresh)
            con.executemany("DELETE FROM stores WHERE path = ?", [(g,) for g in sorted(gone)])
    except sqlite3.Error as exc:
        log.warning("could not update catalog index %s (%s)", index_path, exc)
    finally:
        con.close()

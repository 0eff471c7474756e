"""Store metadata is read in one place: no other module parses ``zarr.json`` or JSON records by hand."""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pytest

from sweepshell.store import metadata

ROOT = Path(__file__).resolve().parents[2] / "sweepshell"

#: modules that parse JSON files of their own (not store metadata): claim files, the catalog's cache
OWN_JSON = {"sweepshell/engine/claims.py", "sweepshell/store/catalog.py", "sweepshell/store/catalog_index.py",
            "sweepshell/store/leftovers.py"}


def _offences(path: Path) -> list[str]:
    rel = path.relative_to(ROOT.parent).as_posix()
    found = []
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Constant) and node.value == metadata.META_FILE:
            found.append(f"{rel}:{node.lineno}: names {metadata.META_FILE}")
        if (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute) and node.func.attr in ("loads", "load")
                and isinstance(node.func.value, ast.Name) and node.func.value.id == "json" and rel not in OWN_JSON):
            found.append(f"{rel}:{node.lineno}: json.{node.func.attr}")
    return found


def test_only_the_metadata_module_parses_store_metadata():
    bad = [o for path in sorted(ROOT.rglob("*.py")) if path.name != "metadata.py" or path.parent.name != "store"
           for o in _offences(path)]
    assert not bad, "store metadata parsed outside sweepshell/store/metadata.py:\n" + "\n".join(bad)


def test_records_round_trip_with_nan_as_null(tmp_path):
    record = metadata.canonical_json({"b": [1.0, float("nan")], "a": np.float64(2.5)})
    assert record == '{"a": 2.5, "b": [1.0, null]}'
    assert metadata.read_record({"x": record}, "x") == {"a": 2.5, "b": [1.0, None]}
    assert metadata.read_record({}, "x", "{}") == {}
    with pytest.raises(KeyError):
        metadata.read_record({}, "x")


def test_attributes_of_missing_or_broken_nodes(tmp_path):
    assert metadata.try_read_attrs(tmp_path) is None and not metadata.is_store(tmp_path)
    (tmp_path / metadata.META_FILE).write_text("[1, 2]")
    assert metadata.try_read_attrs(tmp_path) is None and not metadata.is_store(tmp_path)
    (tmp_path / metadata.META_FILE).write_text(f'{{"attributes": {{"{metadata.ATTR.schema}": 1}}}}')
    assert metadata.is_store(tmp_path) and metadata.read_attrs(tmp_path) == {metadata.ATTR.schema: 1}

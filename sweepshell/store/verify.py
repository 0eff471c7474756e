"""Check that a store is internally consistent and say what a run would recompute.

Checks, in order:

1. **Metadata**: every ``zarr.json`` in the store parses as JSON; the root is a sweepshell
   store of a known schema.
2. **Attributes**: settings, fixed parameters and axes records parse as JSON objects, the
   block shape has one positive whole number per axis, regimes are a list of names, the
   creation time is ISO 8601.
3. **Layout**: the ledger's dimensions are the axes in order with the recorded lengths; the
   coordinates hold exactly the recorded axis values; every data variable starts with the
   axis dimensions.
4. **Chunks**: every chunk of every data variable decodes. The codecs carry zstd checksums,
   so a flipped byte is an error, not silently different numbers.
5. **Ledger against values**, per point: an untrusted final status (``not_converged``,
   ``outside_validity``, ``failed``) has every output NaN and regime -1; a trusted status
   (``ok``, ``no_instability``) has a regime in ``0 .. len(regimes)-1``; status codes are
   known. Pending points may hold anything (a run killed after writing outputs leaves them;
   they are recomputed).

The off-grid point list (sub-group ``points``), when present, is checked the same way: its
chunks decode and its final points obey the ledger rules (its pending points are an
interrupted append, ignored by readers). ``repair`` does not touch it.

A run recomputes every block holding a pending point; a block whose ledger chunk cannot be
decoded reads as pending, so it is recomputed too. A block whose *output* chunk is
unreadable while its ledger says final is not recomputed by a run: ``repair=True`` sets such
blocks (and blocks breaking the ledger rules) back to pending — one whole-chunk write of the
ledger per block — so the next run recomputes them.

Nothing read from the store is imported or executed: attributes are parsed as JSON, arrays
decoded by zarr with the store's declared numeric dtypes.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.errors import StoreDamagedError, StoreNotFoundError, StoreSchemaError
from sweepshell.models.base import Status
from sweepshell.plan import Block, iter_blocks
from sweepshell.store import chunk_checks, integrity, metadata
from sweepshell.store.catalog import read_axis_order
from sweepshell.store.metadata import ATTR
from sweepshell.store.verify_checks import (
    check_attributes,
    check_ledger,
    check_metadata_files,
    check_point_list,
    failure_reason,
    open_arrays,
)
from sweepshell.store.verify_report import VerifyProblem, VerifyReport

__all__ = ["VerifyProblem", "VerifyReport", "verify_store"]


def verify_store(path: str | os.PathLike[str], *, repair: bool = False) -> VerifyReport:
    """Check a store for internal consistency; optionally repair metadata and reset bad blocks to pending.

    Parameters
    ----------
    path
        The store folder.
    repair
        First rebuild what metadata can be rebuilt (see :func:`sweepshell.store.integrity.repair_metadata`),
        then set blocks whose ledger says final but whose chunks are missing or do not decode, or whose
        values break the ledger rules, back to pending (whole-chunk ledger writes), so that a run
        recomputes them.

    Returns
    -------
    VerifyReport
        ``report.consistent`` is ``False`` when any problem was found (before repair).

    Raises
    ------
    StoreNotFoundError
        If there is no folder with a ``zarr.json`` at ``path``.
    StoreSchemaError
        If it is not a sweepshell store, or of an unknown schema version.
    """
    root = Path(path)
    if not root.is_dir() or not metadata.has_node(root):
        raise StoreNotFoundError(f"no store at {str(root)!r}; give a store folder (ending in .zarr)",
                                 field="store", value=str(root))
    if not repair:
        return _verify(root, repair=False)
    before = _metadata_problems(root)
    if not before:
        return _verify(root, repair=True)
    changes = integrity.repair_metadata(root)
    report = _verify(root, repair=True)
    seen = {p.message for p in report.problems}
    return replace(report, problems=tuple(p for p in before if p.message not in seen) + report.problems,
                   repaired_metadata=tuple(changes))


def _metadata_problems(root: Path) -> list[VerifyProblem]:
    """Return the metadata problems alone (cheap: small JSON files, no chunks)."""
    problems = check_metadata_files(root)
    try:
        meta = integrity.read_root_metadata(root)
    except (StoreDamagedError, FileNotFoundError):
        return problems
    return problems + [VerifyProblem("metadata", p.message, variable=p.variable)
                       for p in integrity.scan_metadata(root, meta)]



def _verify(root: Path, *, repair: bool) -> VerifyReport:
    """Run the checks in order; stop early when what follows cannot be read (no axes, no ledger)."""
    problems = check_metadata_files(root)
    try:
        attrs = metadata.read_node(root).get("attributes", {})
    except (OSError, ValueError):
        return VerifyReport(path=str(root), problems=tuple(problems))
    _check_schema(root, attrs)
    attr_problems, axes, block_shape, regimes = check_attributes(attrs)
    problems += attr_problems
    if axes is None or block_shape is None:
        return VerifyReport(path=str(root), problems=tuple(problems))
    reported = {p.message.split(" ", 1)[0] for p in problems}  # files already named as unparseable
    problems += [VerifyProblem("metadata", p.message, variable=p.variable)
                 for p in integrity.scan_metadata(root, metadata.read_node(root))
                 if f"{p.variable}/zarr.json" not in reported]
    names = read_axis_order(root, axes)
    layout_problems, arrays = open_arrays(root, names, axes)
    problems += layout_problems
    shape = tuple(len(axes[n]) for n in names)
    if metadata.STATUS_VAR not in arrays:
        return VerifyReport(path=str(root), total=int(np.prod(shape)), block_shape=block_shape,
                            problems=tuple(problems))
    scan = _scan_blocks(root, arrays, shape, block_shape, len(regimes), integrity.declared_outputs(attrs), repair)
    problems += scan.problems
    repaired = _reset_to_pending(root, scan) if scan.to_repair else []
    problems += check_point_list(root, names, len(regimes))
    return VerifyReport(path=str(root), total=int(np.prod(shape)), counts=_named_counts(scan.counts),
                        block_shape=block_shape, blocks=scan.blocks, recompute_blocks=tuple(sorted(scan.recompute)),
                        recompute_points=scan.recompute_points, problems=tuple(problems),
                        repaired_blocks=tuple(repaired))


def _check_schema(root: Path, attrs: Any) -> None:
    """Refuse a folder that is not a sweepshell store, or one of another schema version."""
    if not isinstance(attrs, dict) or ATTR.schema not in attrs:
        raise StoreSchemaError(f"{str(root)!r} is not a sweepshell store (no {ATTR.schema} attribute)",
                               field="store", value=str(root))
    if attrs[ATTR.schema] != metadata.SCHEMA_VERSION:
        raise StoreSchemaError(f"store {str(root)!r} has schema version {attrs[ATTR.schema]!r}; this sweepshell "
                               f"checks version {metadata.SCHEMA_VERSION}", field="store", value=str(root))


@dataclass
class _BlockScan:
    """What the walk over the blocks found: status counts, blocks a run recomputes, blocks to reset."""

    counts: np.ndarray = field(default_factory=lambda: np.zeros(256, dtype=np.int64))
    blocks: int = 0
    recompute: list[tuple[int, ...]] = field(default_factory=list)
    recompute_points: int = 0
    to_repair: list[Block] = field(default_factory=list)
    problems: list[VerifyProblem] = field(default_factory=list)


def _scan_blocks(root: Path, arrays: dict[str, Any], shape: tuple[int, ...], block_shape: tuple[int, ...],
                 n_regimes: int, declared: dict[str, Any] | None, repair: bool) -> _BlockScan:
    """Decode every block of the ledger and the outputs and check it against the ledger rules."""
    outputs = [n for n in arrays if n not in (metadata.STATUS_VAR, metadata.REGIME_VAR)]
    not_nullable = {n for n, spec in (declared or {}).items() if not spec.nullable}
    # lost chunks of final blocks: found by listing the array folders (a missing array misses them all)
    checked = [*(declared or outputs), metadata.REGIME_VAR]
    lost = chunk_checks.find_blocks_missing_chunks(root, _read_ledger_quietly(root, block_shape), block_shape, checked)
    scan = _BlockScan()
    for block in iter_blocks(shape, block_shape):
        scan.blocks += 1
        status, block_problems = _read_status(arrays[metadata.STATUS_VAR], block)
        status_readable = not block_problems
        scan.counts += np.bincount(status.reshape(-1), minlength=256)
        will_recompute = bool((status == Status.pending).any())
        if will_recompute:
            scan.recompute.append(block.index)
            scan.recompute_points += block.n_points
        values = _read_values(arrays, [metadata.REGIME_VAR, *outputs], block, will_recompute, block_problems)
        block_lost = lost.get(block.index, [])
        block_problems += [_lost_chunk(name, block, will_recompute) for name in block_lost]
        if status_readable:
            block_problems += check_ledger(block, status, values, outputs, n_regimes, will_recompute,
                                           not_nullable - set(block_lost))
        scan.problems += block_problems
        if repair and any(not p.recomputed for p in block_problems):
            scan.to_repair.append(block)
    return scan


def _read_status(ledger: Any, block: Block) -> tuple[np.ndarray, list[VerifyProblem]]:
    """Decode one block of the ledger; an undecodable block reads as pending (a run recomputes it)."""
    try:
        return np.asarray(ledger[block.slices]), []
    except Exception as exc:
        return np.zeros(block.shape, dtype=np.uint8), [VerifyProblem(
            "chunk", f"status block {list(block.index)} does not decode ({failure_reason(exc)}); a run recomputes "
                     "it", variable=metadata.STATUS_VAR, block=block.index, points=block.n_points, recomputed=True)]


def _read_values(arrays: dict[str, Any], names: list[str], block: Block, will_recompute: bool,
                 problems: list[VerifyProblem]) -> dict[str, np.ndarray]:
    """Decode one block of each named variable; append a problem for each that does not decode."""
    values: dict[str, np.ndarray] = {}
    for name in names:
        if name not in arrays:
            continue
        try:
            values[name] = np.asarray(arrays[name][block.slices])
        except Exception as exc:
            problems.append(VerifyProblem(
                "chunk", f"{name} block {list(block.index)} does not decode ({failure_reason(exc)})"
                + ("; a run recomputes it" if will_recompute else "; its status is final, so a run does not "
                   "recompute it"), variable=name, block=block.index, points=block.n_points,
                recomputed=will_recompute))
    return values


def _lost_chunk(name: str, block: Block, will_recompute: bool) -> VerifyProblem:
    return VerifyProblem(
        "chunk", f"{name} block {list(block.index)} has no chunk on disk (lost data) although its status "
                 "is final" + ("" if will_recompute else ", so a run does not recompute it"),
        variable=name, block=block.index, points=block.n_points, recomputed=will_recompute)


def _reset_to_pending(root: Path, scan: _BlockScan) -> list[tuple[int, ...]]:
    """Set the blocks to repair back to pending (one whole-chunk ledger write each); return their indices."""
    import zarr

    repaired: list[tuple[int, ...]] = []
    ledger: Any = zarr.open_array(str(root / metadata.STATUS_VAR), mode="r+", zarr_format=3)
    for block in scan.to_repair:
        ledger[block.slices] = np.zeros(block.shape, dtype=np.uint8)
        repaired.append(block.index)
        if block.index not in scan.recompute:
            scan.recompute.append(block.index)
            scan.recompute_points += block.n_points
    return repaired


def _named_counts(counts: np.ndarray) -> dict[str, int]:
    named = {s.name: int(counts[s.value]) for s in Status}
    unknown = int(counts[len(Status):].sum())
    if unknown:
        named["unknown"] = unknown
    return named


def _read_ledger_quietly(root: Path, block_shape: tuple[int, ...]) -> np.ndarray:
    from sweepshell.store.reader import read_ledger

    try:
        return read_ledger(root, block_shape)
    except Exception:  # an unopenable ledger is reported by the layout check
        return np.zeros((0,) * len(block_shape), dtype=np.uint8)


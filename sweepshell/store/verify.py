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

import datetime as _dt
import os
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.errors import StoreDamagedError, StoreNotFoundError, StoreSchemaError
from sweepshell.models.base import TRUSTED_STATUSES, Status
from sweepshell.plan import iter_blocks
from sweepshell.store import chunk_checks, integrity, metadata
from sweepshell.store.catalog import read_axis_order
from sweepshell.store.metadata import ATTR

__all__ = ["VerifyProblem", "VerifyReport", "verify_store"]

_UNTRUSTED_FINAL = np.array(sorted(int(s) for s in Status if s is not Status.pending and s not in TRUSTED_STATUSES))
_TRUSTED = np.array(sorted(int(s) for s in TRUSTED_STATUSES))
_MAX_LISTED = 12


@dataclass(frozen=True)
class VerifyProblem:
    """One inconsistency.

    Attributes
    ----------
    kind
        ``metadata``, ``attribute``, ``layout``, ``chunk`` (does not decode) or ``ledger``
        (values disagree with the status).
    message
        One line saying what is wrong and where.
    variable
        The variable concerned, if any.
    block
        Index of the block concerned, if any.
    points
        Number of points concerned (0 when not about points).
    recomputed
        Whether the next run recomputes the block anyway (its ledger reads as pending).
    """

    kind: str
    message: str
    variable: str | None = None
    block: tuple[int, ...] | None = None
    points: int = 0
    recomputed: bool = False

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "message": self.message, "variable": self.variable,
                "block": list(self.block) if self.block is not None else None, "points": self.points,
                "recomputed": self.recomputed}


@dataclass(frozen=True)
class VerifyReport:
    """The result of :func:`verify_store`.

    Attributes
    ----------
    path
        The store checked.
    total
        Grid points (0 if the layout could not be read).
    counts
        Status name → points, as decoded (unreadable ledger chunks count as pending).
    block_shape
        The store's block (chunk) shape.
    blocks
        Number of blocks.
    recompute_blocks
        Blocks the next run recomputes (holding a pending point or an unreadable ledger chunk).
    recompute_points
        Points in those blocks.
    problems
        Every inconsistency found; empty when the store is consistent.
    repaired_blocks
        Blocks set back to pending by ``repair=True``.
    repaired_metadata
        What ``repair=True`` rebuilt of the metadata, one line each.
    """

    path: str
    total: int = 0
    counts: dict[str, int] = field(default_factory=dict)
    block_shape: tuple[int, ...] = ()
    blocks: int = 0
    recompute_blocks: tuple[tuple[int, ...], ...] = ()
    recompute_points: int = 0
    problems: tuple[VerifyProblem, ...] = ()
    repaired_blocks: tuple[tuple[int, ...], ...] = ()
    repaired_metadata: tuple[str, ...] = ()

    @property
    def consistent(self) -> bool:
        return not self.problems

    def to_dict(self) -> dict[str, Any]:
        return {"path": self.path, "consistent": self.consistent, "total": self.total, "counts": self.counts,
                "block_shape": list(self.block_shape), "blocks": self.blocks,
                "recompute": {"blocks": [list(b) for b in self.recompute_blocks], "points": self.recompute_points},
                "problems": [p.to_dict() for p in self.problems],
                "repaired_blocks": [list(b) for b in self.repaired_blocks],
                "repaired_metadata": list(self.repaired_metadata)}

    def to_lines(self) -> list[str]:
        """Return the human-readable report printed by ``sweepshell verify``."""
        counts = ", ".join(f"{v} {k}" for k, v in self.counts.items() if v)
        head = "consistent" if self.consistent else f"{len(self.problems)} problems"
        lines = [f"store {self.path}: {head}; {self.total} points ({counts or 'none'}) in {self.blocks} blocks"]
        for p in self.problems[:_MAX_LISTED]:
            lines.append(f"  {p.kind}: {p.message}")
        if len(self.problems) > _MAX_LISTED:
            lines.append(f"  ... and {len(self.problems) - _MAX_LISTED} more (see --json)")
        if self.recompute_blocks:
            shown = ", ".join(str(list(b)) for b in self.recompute_blocks[:6])
            more = " ..." if len(self.recompute_blocks) > 6 else ""
            lines.append(f"  a run would recompute {len(self.recompute_blocks)} blocks ({self.recompute_points} "
                         f"points): {shown}{more}")
        else:
            lines.append("  a run would recompute nothing")
        for change in self.repaired_metadata:
            lines.append(f"  repaired: {change}")
        stuck = [p for p in self.problems if p.block is not None and not p.recomputed]
        if stuck and not self.repaired_blocks:
            lines.append("  blocks with final status but bad values are not recomputed by a run; "
                         f"`sweepshell verify --repair {self.path}` sets them back to pending")
        if any(p.kind == "metadata" for p in self.problems) and not self.repaired_metadata:
            lines.append(f"  damaged metadata: `sweepshell verify --repair {self.path}` rebuilds what the arrays "
                         "allow")
        if self.repaired_blocks:
            lines.append(f"  repaired: {len(self.repaired_blocks)} blocks set back to pending; run the sweep again")
        return lines


def _check_metadata_files(root: Path) -> list[VerifyProblem]:
    problems = []
    for meta in sorted(root.rglob(metadata.META_FILE)):
        try:
            metadata.read_node(meta.parent)
        except (OSError, ValueError) as exc:
            rel = meta.relative_to(root).as_posix()
            problems.append(VerifyProblem("metadata", f"{rel} does not parse ({exc})"))
    return problems


def _check_attributes(attrs: dict[str, Any]) -> tuple[list[VerifyProblem], dict[str, list[Any]] | None,
                                                       tuple[int, ...] | None, list[str]]:
    problems = []
    parsed: dict[str, Any] = {}
    for key in (ATTR.settings, ATTR.fixed, ATTR.axes):
        try:
            value = metadata.read_record(attrs, key)
            if not isinstance(value, dict):
                raise ValueError("not an object")
            parsed[key] = value
        except (KeyError, TypeError, ValueError) as exc:
            problems.append(VerifyProblem("attribute", f"attribute {key} is missing or does not parse ({exc})"))
    axes = parsed.get(ATTR.axes)
    if axes is not None and not all(isinstance(v, list) and v for v in axes.values()):
        problems.append(VerifyProblem("attribute", f"attribute {ATTR.axes} has an axis without a list of values"))
        axes = None
    block_shape: tuple[int, ...] | None = None
    raw = attrs.get(ATTR.block_shape)
    if isinstance(raw, list) and all(isinstance(b, int) and not isinstance(b, bool) and b > 0 for b in raw) and (
            axes is None or len(raw) == len(axes)):
        block_shape = tuple(raw)
    else:
        problems.append(VerifyProblem("attribute", f"attribute {ATTR.block_shape}={raw!r} is not one positive "
                                                   "whole number per axis"))
    regimes = attrs.get(ATTR.regimes)
    if not (isinstance(regimes, list) and all(isinstance(r, str) for r in regimes)):
        problems.append(VerifyProblem("attribute", f"attribute {ATTR.regimes}={regimes!r} is not a list of names"))
        regimes = []
    for key in (ATTR.model, ATTR.model_version):
        if not isinstance(attrs.get(key), str):
            problems.append(VerifyProblem("attribute", f"attribute {key}={attrs.get(key)!r} is not a string"))
    try:
        _dt.datetime.fromisoformat(str(attrs.get(ATTR.created)))
    except ValueError:
        problems.append(VerifyProblem("attribute", f"attribute {ATTR.created}={attrs.get(ATTR.created)!r} is not "
                                                   "an ISO 8601 time"))
    return problems, axes, block_shape, regimes


def _open_arrays(root: Path, names: list[str], axes: dict[str, list[Any]]) -> tuple[
        list[VerifyProblem], dict[str, Any]]:
    """Open every data variable from its own metadata (not the consolidated copy) and check the layout."""
    import zarr

    problems: list[VerifyProblem] = []
    arrays: dict[str, Any] = {}
    shape = tuple(len(axes[n]) for n in names)
    for sub in metadata.child_nodes(root):
        name = sub.name
        try:
            meta = metadata.read_node(sub)
        except (OSError, ValueError):
            continue  # reported by the metadata check
        if meta.get("node_type") != "array":
            continue
        try:
            arr = zarr.open_array(str(sub), mode="r", zarr_format=3)
        except Exception as exc:
            problems.append(VerifyProblem("metadata", f"array {name} cannot be opened ({type(exc).__name__})",
                                          variable=name))
            continue
        dims = tuple(getattr(arr.metadata, "dimension_names", None) or ())
        if name in axes:
            try:
                values = np.asarray(arr[...]).tolist()
            except Exception as exc:
                problems.append(VerifyProblem("chunk", f"coordinate {name} does not decode ({type(exc).__name__})",
                                              variable=name))
                continue
            recorded = axes[name]
            if [str(v) for v in values] != [str(v) for v in recorded] and values != recorded:
                problems.append(VerifyProblem("layout", f"coordinate {name} differs from the recorded axis values",
                                              variable=name))
            continue
        if dims[:len(names)] != tuple(names):
            if len(dims) == 1 and dims[0] not in names:
                continue  # the coordinate of an extra output dimension
            problems.append(VerifyProblem("layout", f"variable {name} has dimensions {list(dims)}, expected the axes "
                                                    f"{names} first", variable=name))
            continue
        if tuple(arr.shape[:len(names)]) != shape:
            problems.append(VerifyProblem("layout", f"variable {name} has shape {list(arr.shape)}, the axes say "
                                                    f"{list(shape)}", variable=name))
            continue
        arrays[name] = arr
    for required in (metadata.STATUS_VAR, metadata.REGIME_VAR):
        if required not in arrays and not any(p.variable == required for p in problems):
            problems.append(VerifyProblem("layout", f"variable {required} is missing", variable=required))
    return problems, arrays


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
    problems = _check_metadata_files(root)
    try:
        meta = integrity.read_root_metadata(root)
    except (StoreDamagedError, FileNotFoundError):
        return problems
    return problems + [VerifyProblem("metadata", p.message, variable=p.variable)
                       for p in integrity.scan_metadata(root, meta)]


def _verify(root: Path, *, repair: bool) -> VerifyReport:
    problems = _check_metadata_files(root)
    try:
        attrs = metadata.read_node(root).get("attributes", {})
    except (OSError, ValueError):
        return VerifyReport(path=str(root), problems=tuple(problems))
    if not isinstance(attrs, dict) or ATTR.schema not in attrs:
        raise StoreSchemaError(f"{str(root)!r} is not a sweepshell store (no {ATTR.schema} attribute)",
                               field="store", value=str(root))
    if attrs[ATTR.schema] != metadata.SCHEMA_VERSION:
        raise StoreSchemaError(f"store {str(root)!r} has schema version {attrs[ATTR.schema]!r}; this sweepshell "
                               f"checks version {metadata.SCHEMA_VERSION}", field="store", value=str(root))
    attr_problems, axes, block_shape, regimes = _check_attributes(attrs)
    problems += attr_problems
    if axes is None or block_shape is None:
        return VerifyReport(path=str(root), problems=tuple(problems))
    root_meta = metadata.read_node(root)
    reported = {p.message.split(" ", 1)[0] for p in problems}  # files already named as unparseable
    problems += [VerifyProblem("metadata", p.message, variable=p.variable)
                 for p in integrity.scan_metadata(root, root_meta) if f"{p.variable}/zarr.json" not in reported]
    declared = integrity.declared_outputs(attrs)
    names = read_axis_order(root, axes)
    layout_problems, arrays = _open_arrays(root, names, axes)
    problems += layout_problems
    shape = tuple(len(axes[n]) for n in names)
    if metadata.STATUS_VAR not in arrays:
        return VerifyReport(path=str(root), total=int(np.prod(shape)), block_shape=block_shape,
                            problems=tuple(problems))
    outputs = [n for n in arrays if n not in (metadata.STATUS_VAR, metadata.REGIME_VAR)]
    not_nullable = {n for n, spec in (declared or {}).items() if not spec.nullable}
    # lost chunks of final blocks: found by listing the array folders (a missing array misses them all)
    checked = [*(declared or outputs), metadata.REGIME_VAR]
    lost = chunk_checks.find_blocks_missing_chunks(root, _read_ledger_quietly(root, block_shape), block_shape, checked)
    counts = np.zeros(256, dtype=np.int64)
    recompute: list[tuple[int, ...]] = []
    recompute_points = 0
    to_repair: list[Any] = []
    n_blocks = 0
    for block in iter_blocks(shape, block_shape):
        n_blocks += 1
        block_problems: list[VerifyProblem] = []
        try:
            status = np.asarray(arrays[metadata.STATUS_VAR][block.slices])
            status_readable = True
        except Exception as exc:
            status = np.zeros(block.shape, dtype=np.uint8)
            status_readable = False
            block_problems.append(VerifyProblem(
                "chunk", f"status block {list(block.index)} does not decode ({_reason(exc)}); a run recomputes it",
                variable=metadata.STATUS_VAR, block=block.index, points=block.n_points, recomputed=True))
        counts += np.bincount(status.reshape(-1), minlength=256)
        pending = status == Status.pending
        will_recompute = bool(pending.any())
        if will_recompute:
            recompute.append(block.index)
            recompute_points += block.n_points
        values: dict[str, np.ndarray] = {}
        for name in [metadata.REGIME_VAR, *outputs]:
            if name not in arrays:
                continue
            try:
                values[name] = np.asarray(arrays[name][block.slices])
            except Exception as exc:
                block_problems.append(VerifyProblem(
                    "chunk", f"{name} block {list(block.index)} does not decode ({_reason(exc)})"
                    + ("; a run recomputes it" if will_recompute else "; its status is final, so a run does not "
                       "recompute it"), variable=name, block=block.index, points=block.n_points,
                    recomputed=will_recompute))
        for name in lost.get(block.index, []):
            block_problems.append(VerifyProblem(
                "chunk", f"{name} block {list(block.index)} has no chunk on disk (lost data) although its status "
                         "is final" + ("" if will_recompute else ", so a run does not recompute it"),
                variable=name, block=block.index, points=block.n_points, recomputed=will_recompute))
        if status_readable:
            block_problems += _check_ledger(block, status, values, outputs, len(regimes), will_recompute,
                                            not_nullable - set(lost.get(block.index, [])))
        problems += block_problems
        if repair and any(not p.recomputed for p in block_problems):
            to_repair.append(block)
    repaired: list[tuple[int, ...]] = []
    if to_repair:
        import zarr

        ledger: Any = zarr.open_array(str(root / metadata.STATUS_VAR), mode="r+", zarr_format=3)
        for block in to_repair:
            ledger[block.slices] = np.zeros(block.shape, dtype=np.uint8)
            repaired.append(block.index)
            if block.index not in recompute:
                recompute.append(block.index)
                recompute_points += block.n_points
    problems += _check_point_list(root, names, len(regimes))
    named = {s.name: int(counts[s.value]) for s in Status}
    unknown = int(counts[len(Status):].sum())
    if unknown:
        named["unknown"] = unknown
    return VerifyReport(path=str(root), total=int(np.prod(shape)), counts=named, block_shape=block_shape,
                        blocks=n_blocks, recompute_blocks=tuple(sorted(recompute)), recompute_points=recompute_points,
                        problems=tuple(problems), repaired_blocks=tuple(repaired))


def _read_ledger_quietly(root: Path, block_shape: tuple[int, ...]) -> np.ndarray:
    from sweepshell.store.reader import read_ledger

    try:
        return read_ledger(root, block_shape)
    except Exception:  # an unopenable ledger is reported by the layout check
        return np.zeros((0,) * len(block_shape), dtype=np.uint8)


def _reason(exc: BaseException) -> str:
    text = str(exc).splitlines()[0] if str(exc) else ""
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def _check_ledger(block: Any, status: np.ndarray, values: dict[str, np.ndarray], outputs: list[str],
                  n_regimes: int, will_recompute: bool, not_nullable: set[str] | frozenset[str] = frozenset(),
                  ) -> list[VerifyProblem]:
    """Return the ledger-rule violations of one block (pending points are exempt).

    ``not_nullable`` names the outputs that must hold a value at every trusted point: NaN there
    is lost data, not an answer.
    """
    problems = []
    where = f"block {list(block.index)}"
    unknown = ~np.isin(status, np.arange(len(Status)))
    if unknown.any():
        problems.append(VerifyProblem("ledger", f"{where}: {int(unknown.sum())} points have unknown status codes "
                                                f"{sorted(set(status[unknown].tolist()))[:5]}",
                                      variable=metadata.STATUS_VAR, block=block.index, points=int(unknown.sum()),
                                      recomputed=will_recompute))
    untrusted = np.isin(status, _UNTRUSTED_FINAL)
    trusted = np.isin(status, _TRUSTED)
    regime = values.get(metadata.REGIME_VAR)
    if regime is not None:
        bad = untrusted & (regime != -1)
        if bad.any():
            problems.append(VerifyProblem("ledger", f"{where}: {int(bad.sum())} points with an untrusted status "
                                                    "have a regime other than -1", variable=metadata.REGIME_VAR,
                                          block=block.index, points=int(bad.sum()), recomputed=will_recompute))
        bad = trusted & ((regime < 0) | (regime >= n_regimes))
        if bad.any():
            problems.append(VerifyProblem("ledger", f"{where}: {int(bad.sum())} points with a trusted status have "
                                                    f"no regime in 0..{n_regimes - 1}", variable=metadata.REGIME_VAR,
                                          block=block.index, points=int(bad.sum()), recomputed=will_recompute))
    for name in outputs:
        arr = values.get(name)
        if arr is None or arr.dtype.kind != "f":
            continue
        finite = ~np.isnan(arr.reshape(*status.shape, -1)).all(axis=-1)
        bad = untrusted & finite
        if bad.any():
            problems.append(VerifyProblem("ledger", f"{where}: {int(bad.sum())} points with an untrusted status "
                                                    f"have values in {name} (must be NaN)", variable=name,
                                          block=block.index, points=int(bad.sum()), recomputed=will_recompute))
        bad = trusted & ~finite if name in not_nullable else None
        if bad is not None and bad.any():
            problems.append(VerifyProblem("ledger", f"{where}: {int(bad.sum())} points with a trusted status have "
                                                    f"no value in {name} (NaN; {name} is never NaN at a trusted "
                                                    "point: lost data)", variable=name, block=block.index,
                                          points=int(bad.sum()), recomputed=will_recompute))
    return problems


_POINT_BOOKKEEPING = ("level", "origin")


def _check_point_list(root: Path, axis_names: list[str], n_regimes: int) -> list[VerifyProblem]:
    """Check the off-grid point list: chunks decode, final points obey the ledger rules."""
    import zarr

    folder = root / metadata.POINTS_GROUP
    if not metadata.has_node(folder):
        return []
    problems: list[VerifyProblem] = []
    values: dict[str, np.ndarray] = {}
    for sub in metadata.child_nodes(folder):
        name = f"{metadata.POINTS_GROUP}/{sub.name}"
        try:
            values[sub.name] = np.asarray(zarr.open_array(str(sub), mode="r", zarr_format=3)[...])
        except Exception as exc:
            problems.append(VerifyProblem("chunk", f"{name} does not decode ({_reason(exc)})", variable=name))
    status = values.get(metadata.STATUS_VAR)
    if status is None:
        if not any(p.variable == f"{metadata.POINTS_GROUP}/{metadata.STATUS_VAR}" for p in problems):
            problems.append(VerifyProblem("layout", "the point list has no status array",
                                          variable=f"{metadata.POINTS_GROUP}/{metadata.STATUS_VAR}"))
        return problems
    skip = {*axis_names, metadata.STATUS_VAR, metadata.REGIME_VAR, *_POINT_BOOKKEEPING}
    outputs = [n for n in values if n not in skip]
    clipped = {n: v[: status.shape[0]] for n, v in values.items()}
    found = _check_ledger(_PointListBlock(), status, clipped, outputs, n_regimes, False)
    return problems + [VerifyProblem(p.kind, p.message.replace("block []", "point list"),
                                     variable=f"{metadata.POINTS_GROUP}/{p.variable}", points=p.points) for p in found]


@dataclass(frozen=True)
class _PointListBlock:
    """Stands for a block in messages about the point list."""

    index: tuple[int, ...] = ()

"""``sweepshell`` command line: parse arguments, call the library, print, exit.

Exit codes (:data:`EXIT_CODES_HELP`): 0 done; 1 the command failed (``verify`` found problems,
or an unexpected error); 2 bad input or a damaged store (one clear line on stderr, nothing
written); 3 a run stopped on an outside fault (disk full, file-size limit, scheduler lost —
run the same command again to continue); 130 interrupted (resumable). Every failure is one
line on stderr, never a traceback (``-v`` logs the details). Heavy libraries are imported
inside the commands that need them so that ``--help`` and ``status`` answer quickly.
"""

from __future__ import annotations

import argparse
import errno
import importlib
import importlib.util
import json
import logging
import os
import sys
from collections.abc import Sequence
from typing import Any, NoReturn

from sweepshell.about import CAUTION, __version__
from sweepshell.cli.options import STORE_HELP, add_format_option
from sweepshell.errors import SweepshellError

__all__ = ["build_parser", "limit_blas_threads", "main"]

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_BAD_INPUT = 2
EXIT_STOPPED = 3
EXIT_INTERRUPTED = 130

_CAUTION_HELP = "CAUTION: " + CAUTION.removeprefix("Caution: ")
EXIT_CODES_HELP = ("exit codes: 0 done; 1 failed (verify found problems, or an unexpected error); 2 bad input or a "
                   "damaged store (one line on stderr, nothing written); 3 a run stopped on an outside fault (disk "
                   "full, file-size limit, scheduler lost: run the same command again to continue); 130 interrupted "
                   "(resumable)")


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> NoReturn:  # argparse would print usage; we print one line
        print(f"sweepshell: error: {message}; see `{self.prog} --help`", file=sys.stderr)
        raise SystemExit(EXIT_BAD_INPUT)


def build_parser() -> argparse.ArgumentParser:
    """Return the argument parser of every command."""
    parser = _Parser(
        prog="sweepshell",
        description="Sweep validated reduced-order buckling models of thin shells and sheets over parameter "
                    "grids; keep every result in a labelled zarr store; query and map it.",
        epilog=EXIT_CODES_HELP + "\n\n" + _CAUTION_HELP, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"sweepshell {__version__}")
    parser.add_argument("-v", "--verbose", action="store_true", help="log what the library does")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    run = sub.add_parser(
        "run", help="run (or resume) a sweep",
        description="Run a sweep: SWEEP is a name in configs/sweep/, a path to a YAML file, or a store (which "
                    "continues from the sweep recorded in it, e.g. a merged store). Running it again "
                    "continues where it stopped. Overrides use hydra's grammar, e.g. fixed.poisson_ratio=0.25 "
                    "axes.shell_parameter=range(3,12,0.5) axes.edge=clamped,pinned store.path=scratch/x.zarr "
                    "executor=threads executor.workers=1. The default executor (auto) computes small sweeps in this "
                    "process and starts local worker processes for larger ones.",
        epilog=EXIT_CODES_HELP + ". " + _CAUTION_HELP)
    run.add_argument("sweep", metavar="SWEEP", help="sweep name, sweep YAML file, or store to continue")
    run.add_argument("overrides", nargs="*", metavar="OVERRIDE", help="key=value in hydra's grammar (see above)")
    run.add_argument("--config-dir",
                     help="the configs/ folder (default: ./configs, else the demo configs packaged with sweepshell)")
    run.add_argument("--progress", choices=("auto", "bar", "lines", "none"), default="auto",
                     help="progress display (default: a bar on a terminal, periodic lines otherwise)")
    run.add_argument("--dry-run", action="store_true",
                     help="validate the sweep and print its plan; compute and write nothing")
    run.set_defaults(func=_cmd_run)

    status = sub.add_parser("status", help="what a store holds and how complete it is",
                            description="Counts per status, model and version, axes, completeness.")
    status.add_argument("store", metavar="STORE", help=STORE_HELP)
    add_format_option(status)
    status.set_defaults(func=_cmd_status)

    models = sub.add_parser("models", help="the registered models",
                            description="List the registered models with parameters, outputs and regimes.")
    add_format_option(models)
    models.set_defaults(func=_cmd_models)

    for module_name in _COMMAND_MODULES:
        if importlib.util.find_spec(module_name) is not None:
            module = importlib.import_module(module_name)
            module.register(sub)
    return parser


#: modules adding further commands; each has ``register(subparsers)`` and imports heavy libraries lazily.
#: Every command function returns an exit code and raises SweepshellError for bad input.
_COMMAND_MODULES: tuple[str, ...] = ("sweepshell.cli.analysis", "sweepshell.cli.shape", "sweepshell.cli.sharing")


def _cmd_run(args: argparse.Namespace) -> int:
    plan = _load_run_plan(args)
    if args.dry_run:
        store_note = _describe_existing_store(plan)  # a store the run would refuse is refused here too
        shape = " x ".join(f"{a.name}[{len(a)}]" for a in plan.axes)
        print(f"sweep {plan.name}: model {plan.model} {plan.model_version}, {plan.n_points} points ({shape}), "
              f"store {plan.store_path}; {plan.describe_executor()}")
        print(plan.resolved_yaml, end="")
        print(store_note, file=sys.stderr)
        return EXIT_OK
    from sweepshell.engine.observers import get_observer
    from sweepshell.engine.runner import SweepInterrupted, refine_plan_store, run_plan

    kind = {"lines": "lines", "bar": "bar", "none": "none"}.get(args.progress, "auto")
    observer = get_observer(kind)
    try:
        summary = run_plan(plan, observer=observer)
    except SweepInterrupted as stop:
        then = "; run the same command again to continue" if not stop.summary.complete else \
            " (every block was already written: the store is complete)"
        print(f"interrupted: {stop.summary.to_line()}{then}", file=sys.stderr)
        return EXIT_INTERRUPTED
    print(summary.to_line())
    if plan.refine and summary.complete:
        print(refine_plan_store(plan).to_line())
    return EXIT_OK


def _describe_existing_store(plan: Any) -> str:
    """Say what a run would do with the plan's store; raise the run's own error if it would refuse it."""
    from sweepshell.store.writer import store_exists

    path = plan.store_path
    if not store_exists(path):
        return f"store {path} does not exist yet: the run creates it"
    from sweepshell.models import make_model
    from sweepshell.store.writer import check_store_matches

    check_store_matches(path, plan, make_model(plan.model, plan.settings))
    return f"store {path} exists and matches this sweep: the run continues it"


def _load_run_plan(args: argparse.Namespace) -> Any:
    """Return the plan of ``run SWEEP`` — or of ``run STORE``: the store's own recorded sweep, into that store."""
    import tempfile
    from pathlib import Path

    from sweepshell.config.loader import load_plan
    from sweepshell.store.location import as_path
    from sweepshell.store.metadata import is_store

    store = as_path(args.sweep.rstrip("/"))
    if not is_store(store):
        return load_plan(args.sweep, args.overrides, config_dir=args.config_dir)
    from sweepshell.store.metadata import ATTR
    from sweepshell.store.reader import check_readable_store, read_attrs

    check_readable_store(str(store))
    recorded = str(read_attrs(str(store)).get(ATTR.sweep_yaml) or "")
    if not recorded.strip():
        from sweepshell.errors import ConfigError

        raise ConfigError(f"store {str(store)!r} records no sweep; run it with its sweep file instead",
                          field="sweep", value=args.sweep)
    with tempfile.TemporaryDirectory(prefix="sweepshell-") as folder:
        sweep_file = Path(folder) / f"{store.stem}.yaml"
        sweep_file.write_text(recorded, encoding="utf-8")
        return load_plan(str(sweep_file), [f"store.path={store}", *args.overrides], config_dir=args.config_dir)


def _cmd_status(args: argparse.Namespace) -> int:
    from sweepshell.store.summary import summarize_store

    info = summarize_store(args.store)
    if args.format == "json":
        print(json.dumps(info, indent=2))
        return EXIT_OK
    axes = ", ".join(f"{a['name']}[{a['size']}] {a['min']}..{a['max']}" for a in info["axes"])
    counts = ", ".join(f"{v} {k}" for k, v in info["counts"].items() if v)
    package = info.get("model_package")
    origin = f" from {package} {info.get('model_package_version')}" if package and package != "sweepshell" else ""
    print(f"store {info['path']}: sweep {info['sweep']}, model {info['model']} {info['model_version']}{origin}")
    print(f"  axes: {axes}")
    print(f"  {info['total']} points: {counts}; {info['complete_fraction']:.1%} final"
          + ("" if info["complete"] else " (run the sweep again to continue)"))
    if info["counts"].get("unknown"):
        print(f"  {info['counts']['unknown']} points hold status codes this sweepshell does not know; "
              f"`sweepshell verify {info['path']}` names the blocks")
    if info.get("blocks_missing_chunks"):
        print(f"  {info['blocks_missing_chunks']} final blocks lost chunks (their values are gone); "
              f"`sweepshell run` recomputes them, `sweepshell verify {info['path']}` names them")
    off = info.get("off_grid_points") or {}
    if off:
        print(f"  off-grid points (refine, boundary): {sum(off.values())} "
              f"({', '.join(f'{v} {k}' for k, v in off.items())})")
    return EXIT_OK


def _cmd_models(args: argparse.Namespace) -> int:
    from sweepshell.models import get_model_origin, list_models, make_model

    described = []
    for name in list_models():
        origin = get_model_origin(name)
        d = make_model(name).describe()
        d["origin"] = {"builtin": origin.builtin, "distribution": origin.distribution, "version": origin.version,
                       "label": origin.label}
        described.append(d)
    if args.format == "json":
        print(json.dumps(described, indent=2))
        return EXIT_OK
    for d in described:
        print(f"{d['name']} {d['version']} ({d['origin']['label']}): {d['summary']}")
        for p in d["parameters"]:
            print(f"  parameter {p['name']} [{p['units']}] {p['allowed']}, default {p['default']}: {p['doc']}")
        for o in d["outputs"]:
            dims = f" over {', '.join(o['dims'])}" if o["dims"] else ""
            print(f"  output    {o['name']} [{o['units']}]{dims}: {o['doc']}")
        print(f"  regimes   {', '.join(d['regimes'])}")
    return EXIT_OK


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``sweepshell`` console script; returns the exit code."""
    parser = build_parser()
    # overrides may follow options (`run SWEEP --progress none executor.workers=1`); argparse leaves them over
    args, extra = parser.parse_known_args(argv)
    if extra:
        if getattr(args, "command", None) == "run" and not any(e.startswith("-") for e in extra):
            args.overrides = [*args.overrides, *extra]
        else:
            parser.error(f"unrecognized arguments: {' '.join(extra)}")
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                        format="%(levelname)s %(name)s: %(message)s")
    if args.command is None:
        parser.print_help()
        return EXIT_BAD_INPUT
    try:
        code: int = args.func(args)
    except SweepshellError as err:
        print(f"sweepshell: error: {err}", file=sys.stderr)
        return err.exit_code
    except KeyboardInterrupt:
        print("interrupted; run the same command again to continue", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # no traceback for any input or fault: explain it in one line
        message, failed_code = _explain_failure(args, exc)
        print(f"sweepshell: error: {message}", file=sys.stderr)
        logging.getLogger("sweepshell").info("details of the error above", exc_info=True)
        return failed_code
    return code


def _explain_failure(args: argparse.Namespace, exc: Exception) -> tuple[str, int]:
    """Return one line and the exit code for an unexpected exception (a damaged chunk if that is the cause)."""
    from sweepshell.store.chunk_checks import find_undecodable_chunk

    for attr in ("store", "a", "b"):
        store = getattr(args, attr, None)
        if not isinstance(store, str) or not os.path.isdir(store):
            continue
        try:
            found = find_undecodable_chunk(store)
        except Exception:
            found = None
        if found is not None:
            name, index = found
            return (f"store {store!r}: {name} block {list(index)} does not decode (checksum or format error: the "
                    f"chunk is damaged); run `sweepshell verify --repair {store}`, then run the sweep again",
                    EXIT_BAD_INPUT)
    from sweepshell.store.location import describe_storage_fault

    storage = describe_storage_fault(exc)
    if storage is not None:
        return storage, EXIT_BAD_INPUT
    if isinstance(exc, OSError):
        if exc.errno in (errno.ENOSPC, errno.EFBIG, errno.EDQUOT):
            return (f"{exc.strerror} ({exc.filename or ''}); free space or raise the limit, then run the same "
                    "command again", EXIT_STOPPED)
        return (f"{exc.strerror or type(exc).__name__} ({exc.filename or ''}); check the path and its permissions",
                EXIT_BAD_INPUT)
    first = str(exc).splitlines()[0] if str(exc) else ""
    return (f"unexpected {type(exc).__name__}: {first[:200]}; this is a bug in sweepshell — rerun with -v for the "
            "details and report them", EXIT_FAILED)


#: thread-count variables of the BLAS libraries numpy and scipy may load
BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def limit_blas_threads() -> None:
    """Default the BLAS libraries to one thread, unless the user chose a count (before numpy loads).

    A run computes one block per core: on local worker processes (dask limits their BLAS to one
    thread) or, for small sweeps, in this process. A multi-threaded BLAS here would spin a second
    core on the models' small matrices without finishing sooner, and slow everything else on a
    shared machine.
    """
    for name in BLAS_THREAD_VARIABLES:
        os.environ.setdefault(name, "1")


def entry() -> None:
    """Console-script entry: run :func:`main` and exit with its code.

    After an interrupt the store is already consistent (a block's status is written last), so the process leaves
    at once with 130 instead of letting library shutdown hooks (dask, zarr's event-loop thread) see a second
    interrupt and turn the exit code into a signal death.
    """
    limit_blas_threads()
    code = main()
    if code == EXIT_INTERRUPTED:
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(EXIT_INTERRUPTED)
    raise SystemExit(code)


if __name__ == "__main__":  # pragma: no cover
    entry()

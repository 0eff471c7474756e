"""The package's imports point down only; models import nothing of sweepshell but the model seam.

Every import statement of every module is read with ``ast`` (function-level and
``TYPE_CHECKING`` imports included), so a lazy import cannot hide an upward edge.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "sweepshell"

#: bottom → top; a module may import only from its own layer entry or from a lower rank
RANK = {
    "about": 0, "errors": 0,
    "numerics": 1,
    "models": 2,
    "plan": 3,
    "store": 4,
    "query": 5,
    "engine": 6,
    "plot": 7,
    "config": 8,
    "cli": 9,
    "__main__": 10, "": 10,  # "" is the top-level package (its public convenience functions)
}

#: what a model package may import of sweepshell besides its own package
MODEL_SEAM = ("sweepshell.models.base", "sweepshell.errors", "sweepshell.numerics")

#: declared uses of another model's public code (stated in the using model's theory.md): cap_postbuckling
#: takes shallow_cap's asymmetric scan (its model class), its cos(n theta) mode operators and stability
#: determinants, its axisymmetric problem's pieces (point-force slope, eigenstrain stress) and its mismatch grid rule
MODEL_USES = {"cap_postbuckling": ("sweepshell.models.shallow_cap.model.ShallowCapModel",
                                   "sweepshell.models.shallow_cap.modes.build_mode_operators",
                                   "sweepshell.models.shallow_cap.modes.compute_mode_determinants",
                                   "sweepshell.models.shallow_cap.problem.build_problem",
                                   "sweepshell.models.shallow_cap.kernels.eigenstrain_stress",
                                   "sweepshell.models.shallow_cap.kernels.singular_slope",
                                   "sweepshell.models.shallow_cap.grids.get_mismatch_nodes")}

#: the query layer only reads: it never runs a model (the registry builds models) nor writes a store
QUERY_FORBIDDEN = ("sweepshell.models", "sweepshell.store.writer", "sweepshell.store.merge",
                   "sweepshell.store.points.append_points", "sweepshell.store.metadata.write_attrs")


def module_name(path: Path, root: Path = ROOT) -> str:
    parts = list(path.relative_to(root.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def imports_of(path: Path, root: Path = ROOT) -> list[tuple[int, str]]:
    """Return ``(line, imported name)`` for every import in a module, relative imports resolved.

    ``from a.b import c`` yields ``a.b.c`` (``c`` may be a module or a name in ``a.b``).
    """
    name = module_name(path, root)
    package = name.split(".") if path.name == "__init__.py" else name.split(".")[:-1]
    found = []
    for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
        if isinstance(node, ast.Import):
            found += [(node.lineno, alias.name) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - node.level + 1]
                module = ".".join(base + ([node.module] if node.module else []))
            else:
                module = node.module or ""
            found += [(node.lineno, f"{module}.{alias.name}") for alias in node.names]
    return [(line, target) for line, target in found if target == "sweepshell" or target.startswith("sweepshell.")]


def layer_of(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 and parts[1] in RANK else ""


def upward_edges(root: Path = ROOT) -> list[str]:
    bad = []
    for path in sorted(root.rglob("*.py")):
        src = layer_of(module_name(path, root))
        for line, target in imports_of(path, root):
            dst = layer_of(target)
            if dst == src:
                continue
            if RANK[dst] >= RANK[src]:
                bad.append(f"{path.relative_to(root.parent)}:{line}: {src or 'sweepshell'} → {dst or 'sweepshell'} "
                           f"({target})")
    return bad


def package_graph(root: Path = ROOT) -> dict[str, set[str]]:
    """Return layer → the layers it imports, for the package at ``root`` (printed when run as a script)."""
    graph: dict[str, set[str]] = {}
    for path in sorted(root.rglob("*.py")):
        src = layer_of(module_name(path, root)) or "sweepshell"
        for _, target in imports_of(path, root):
            dst = layer_of(target) or "sweepshell"
            if dst != src:
                graph.setdefault(src, set()).add(dst)
    return graph


def graph_lines(root: Path = ROOT) -> list[str]:
    """Return the import graph between layers as text, bottom layer first; an upward edge is marked ``(up)``."""
    def rank(layer: str) -> int:
        return RANK.get("" if layer == "sweepshell" else layer, 10)

    lines = []
    for layer, targets in sorted(package_graph(root).items(), key=lambda kv: (rank(kv[0]), kv[0])):
        shown = [t + (" (up)" if rank(t) >= rank(layer) else "") for t in sorted(targets, key=lambda t: (rank(t), t))]
        lines.append(f"{layer:10s} -> {', '.join(shown)}")
    return lines


def test_the_graph_text_marks_upward_edges(tmp_path):
    fake = tmp_path / "sweepshell"
    for layer in ("store", "engine"):
        (fake / layer).mkdir(parents=True)
        (fake / layer / "__init__.py").write_text("")
    (fake / "__init__.py").write_text("")
    (fake / "store" / "a.py").write_text("from sweepshell.engine import run\n")
    (fake / "engine" / "b.py").write_text("from sweepshell.store import a\n")
    assert graph_lines(fake) == ["store      -> engine (up)", "engine     -> store"]


def test_imports_point_down_only():
    bad = upward_edges()
    assert not bad, "imports that point up the layers:\n" + "\n".join(bad)


def test_model_packages_import_only_the_seam_and_their_own_code():
    from sweepshell.models import list_models

    packages = sorted(p for p in (ROOT / "models").iterdir() if (p / "__init__.py").is_file())
    assert {p.name for p in packages} >= set(list_models()), "every registered model is a package"
    bad = []
    for package in packages:
        own = f"sweepshell.models.{package.name}"
        for path in sorted(package.rglob("*.py")):
            for line, target in imports_of(path):
                allowed = (own, *MODEL_SEAM, *MODEL_USES.get(package.name, ()))
                if not any(target == a or target.startswith(a + ".") for a in allowed):
                    bad.append(f"{path.relative_to(ROOT.parent)}:{line}: {target}")
    assert not bad, "model packages import outside the model seam:\n" + "\n".join(bad)


def test_numerics_serve_models_without_importing_them():
    bad = [f"{path.relative_to(ROOT.parent)}:{line}: {target}"
           for path in sorted((ROOT / "numerics").rglob("*.py")) for line, target in imports_of(path)
           if not target.startswith(("sweepshell.numerics", "sweepshell.errors"))]
    assert not bad, "numerics import more than numerics and errors:\n" + "\n".join(bad)


def test_query_only_reads():
    bad = [f"{path.relative_to(ROOT.parent)}:{line}: {target}"
           for path in sorted((ROOT / "query").rglob("*.py")) for line, target in imports_of(path)
           if any(target == f or (target.startswith(f + ".") and f == "sweepshell.models"
                                  and not target.startswith("sweepshell.models.base")) for f in QUERY_FORBIDDEN)]
    assert not bad, "the query layer imports code that runs models or writes stores:\n" + "\n".join(bad)


@pytest.mark.parametrize("text, expected", [
    ("from sweepshell.engine.plan import Block\n", "sweepshell/store/bad.py:1: store → engine"),
    ("def f():\n    from ..config import loader\n", "sweepshell/store/bad.py:2: store → config"),
    ("from sweepshell import CAUTION\n", "sweepshell/store/bad.py:1: store → sweepshell"),
])
def test_the_check_names_the_file_line_and_edge(tmp_path, text, expected):
    fake = tmp_path / "sweepshell"
    (fake / "store").mkdir(parents=True)
    (fake / "__init__.py").write_text("")
    (fake / "store" / "__init__.py").write_text("")
    (fake / "store" / "bad.py").write_text(text)
    bad = upward_edges(fake)
    assert len(bad) == 1 and bad[0].startswith(expected), bad


def test_registry_names_match_the_model_classes():
    from sweepshell.models import _REGISTRY, get_model, list_models

    names = list_models()
    assert {"shallow_cap", "foundation_strip", "foundation_sheet", "winkler_column"} <= set(names)
    for name in names:
        module, _ = _REGISTRY[name]
        assert get_model(name).name == name, f"registry key {name!r} names a class called {get_model(name).name!r}"
        assert module == f"sweepshell.models.{name}.model", f"model {name!r} lives outside its package"


if __name__ == "__main__":
    # print the import graph between layers: python -m tests.test_layering [PATH/TO/sweepshell]
    import sys

    print("\n".join(graph_lines(Path(sys.argv[1]).resolve() if len(sys.argv) > 1 else ROOT)))

"""Where-expressions: a small, checked subset of Python evaluated by pandas.

Grammar (what ``--where`` accepts)::

    expr     := expr "and" expr | expr "or" expr | "not" expr | "(" expr ")" | compare
    compare  := term (("<" | "<=" | ">" | ">=" | "==" | "!=") term)+
              | term ("in" | "not in") "[" constant ("," constant)* "]"
    term     := NAME | NUMBER | "STRING" | term ("+" | "-" | "*" | "/" | "**" | "%") term | "-" term
    operators "&", "|", "~" are accepted as synonyms of and, or, not

NAME is an axis, a scalar output, ``regime`` or ``status`` (compared with their names, e.g.
``regime == "buckled"``, ``status != "ok"``) or ``source`` (``"grid"`` or ``"points"``).
Nothing else is allowed: no attribute access, calls, indexing, comprehensions, lambdas or
names starting with an underscore, so an expression can never run code. The checked text is
then evaluated by :meth:`pandas.DataFrame.eval` with empty local and global namespaces.
"""

from __future__ import annotations

import ast
from collections.abc import Collection, Mapping
from typing import TYPE_CHECKING

from sweepshell.errors import QueryError

if TYPE_CHECKING:
    import numpy as np
    import pandas as pd

__all__ = ["GRAMMAR", "check_expression", "evaluate_where", "names_in_expression"]

GRAMMAR = (
    "EXPR combines comparisons of axes, scalar outputs, regime, status and source with and/or/not and "
    "parentheses: `shell_parameter > 5 and regime == \"bifurcation\"`, `regime in [\"stable\", \"buckled\"]`, "
    "`2 < load_ratio <= 10`, `critical_load / load_ratio < 0.5`. Operators: < <= > >= == != in, not in, "
    "+ - * / ** %. Regime and status compare by name. No calls, attributes, indexing or other names."
)

_MAX_LENGTH = 2000
_ALLOWED_BINOPS = (ast.Add, ast.Sub, ast.Mult, ast.Div, ast.Pow, ast.Mod, ast.BitAnd, ast.BitOr)
_ALLOWED_CMPOPS = (ast.Lt, ast.LtE, ast.Gt, ast.GtE, ast.Eq, ast.NotEq, ast.In, ast.NotIn)
_ALLOWED_UNARY = (ast.Not, ast.USub, ast.UAdd, ast.Invert)


def names_in_expression(expr: str) -> set[str]:
    """Return the variable names an (already checked) expression refers to."""
    return {n.id for n in ast.walk(ast.parse(expr, mode="eval")) if isinstance(n, ast.Name)}


def check_expression(expr: str, columns: Collection[str],
                     categories: Mapping[str, Collection[str]] | None = None) -> str:
    """Return ``expr`` stripped if it is a safe where-expression over ``columns``.

    Parameters
    ----------
    expr
        The expression text.
    columns
        The names it may use.
    categories
        For named columns (regime, status, categorical axes): the allowed names, so a
        misspelt name is an error instead of an empty answer.

    Raises
    ------
    QueryError
        For a syntax error, a construct outside the grammar, an unknown name or an
        unknown category; the message names the offending piece and what is allowed.
    """
    text = expr.strip()
    if not text:
        raise QueryError("--where is empty; give an expression such as 'regime == \"buckled\"'",
                         field="where", value=expr)
    if len(text) > _MAX_LENGTH:
        raise QueryError(f"--where is {len(text)} characters long; keep it under {_MAX_LENGTH}",
                         field="where", value=text[:40] + "...")
    try:
        tree = ast.parse(text, mode="eval")
    except SyntaxError as exc:
        raise QueryError(f"--where {text!r} is not a valid expression ({exc.msg} at column {exc.offset}); "
                         + _SHORT_HELP, field="where", value=text) from None
    allowed = sorted(columns)
    for node in ast.walk(tree):
        _check_node(node, text, allowed)
    for node in ast.walk(tree):
        if isinstance(node, ast.Compare) and categories:
            _check_categories(node, text, categories)
    return text


_SHORT_HELP = ("use comparisons of fields (< <= > >= == != in) joined by and/or/not, e.g. "
               "'x > 5 and regime == \"buckled\"' (see `sweepshell query --help`)")


def _refuse(text: str, what: str) -> QueryError:
    return QueryError(f"--where {text!r}: {what} is not allowed; {_SHORT_HELP}", field="where", value=text)


def _check_node(node: ast.AST, text: str, allowed: list[str]) -> None:
    if isinstance(node, (ast.Expression, ast.Load, ast.And, ast.Or, *_ALLOWED_BINOPS, *_ALLOWED_CMPOPS,
                         *_ALLOWED_UNARY)):
        return
    if isinstance(node, ast.BoolOp | ast.Compare):
        return
    if isinstance(node, ast.BinOp):
        if not isinstance(node.op, _ALLOWED_BINOPS):
            raise _refuse(text, f"operator {type(node.op).__name__}")
        return
    if isinstance(node, ast.UnaryOp):
        return
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, (int, float, str)):
            raise _refuse(text, f"constant {node.value!r}")
        return
    if isinstance(node, (ast.List, ast.Tuple)):
        for elt in node.elts:
            if not isinstance(elt, ast.Constant):
                raise _refuse(text, "a list of anything but constants")
        return
    if isinstance(node, ast.Name):
        if node.id.startswith("_"):
            raise _refuse(text, f"name {node.id!r}")
        if node.id not in allowed:
            raise QueryError(f"--where {text!r} uses unknown name {node.id!r}; use one of {', '.join(allowed)}",
                             field="where", value=node.id, allowed=", ".join(allowed))
        return
    kind = {ast.Call: "a function call", ast.Attribute: "attribute access", ast.Subscript: "indexing",
            ast.Lambda: "lambda", ast.NamedExpr: "assignment"}.get(type(node), type(node).__name__)
    raise _refuse(text, kind)


def _check_categories(node: ast.Compare, text: str, categories: Mapping[str, Collection[str]]) -> None:
    terms = [node.left, *node.comparators]
    names = [t.id for t in terms if isinstance(t, ast.Name) and t.id in categories]
    if not names:
        return
    strings: list[str] = []
    for t in terms:
        if isinstance(t, ast.Constant) and isinstance(t.value, str):
            strings.append(t.value)
        elif isinstance(t, (ast.List, ast.Tuple)):
            strings.extend(e.value for e in t.elts if isinstance(e, ast.Constant) and isinstance(e.value, str))
    for name in names:
        known = list(categories[name])
        for s in strings:
            if s not in known:
                raise QueryError(f"--where {text!r}: {name} has no value {s!r}; use one of {', '.join(known)}",
                                 field="where", value=s, allowed=", ".join(known))


def evaluate_where(frame: pd.DataFrame, expr: str) -> np.ndarray:
    """Return the boolean mask of the rows of ``frame`` where the checked ``expr`` holds."""
    import numpy as np

    try:
        mask = frame.eval(expr, engine="python", local_dict={}, global_dict={})
    except Exception as exc:  # pandas raises many types for type mismatches (e.g. string < number)
        raise QueryError(f"--where {expr!r} could not be evaluated ({type(exc).__name__}: "
                         f"{str(exc).splitlines()[0] if str(exc) else ''}); check the types on each side",
                         field="where", value=expr) from None
    values = np.asarray(mask)
    if values.dtype == bool and values.shape == ():  # a condition without names holds everywhere or nowhere
        values = np.full(len(frame), bool(values))
    if values.dtype != bool or values.shape != (len(frame),):
        raise QueryError(f"--where {expr!r} is not a condition (it gives {values.dtype} values); compare "
                         "with <, ==, in ...", field="where", value=expr)
    return values

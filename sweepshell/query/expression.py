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
import math
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
    try:
        _fold_constants(tree.body, text)
    except RecursionError:
        raise QueryError(f"--where is nested too deeply; {_SHORT_HELP}", field="where",
                         value=text[:40]) from None
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


#: largest magnitude a constant sub-expression may reach (float64 overflows at 1.8e308)
_MAX_CONSTANT = 1e300


def _fold_constants(node: ast.AST, text: str) -> float | None:
    """Return the value of a constant numeric sub-expression (``None`` if it involves a name).

    Refuses, before anything is evaluated, what would make the evaluation hang or exhaust memory:
    constants beyond ±1e300 (``9**9**9``, a 400-digit literal), arithmetic on text or lists
    (``"a" * 10**9``) and division by a zero constant. Arithmetic is done in floats with the
    exponent checked first, so checking itself is instant.
    """
    if isinstance(node, ast.Constant):
        if not isinstance(node.value, (int, float)):
            return None
        try:
            value = float(node.value)
        except OverflowError:
            value = math.inf
        if not abs(value) <= _MAX_CONSTANT:
            raise _refuse(text, f"the constant {str(node.value)[:20]}... (beyond ±1e300)")
        return value
    if isinstance(node, ast.UnaryOp):
        inner = _fold_constants(node.operand, text)
        return -inner if inner is not None and isinstance(node.op, ast.USub) else inner
    if isinstance(node, ast.BinOp):
        for side in (node.left, node.right):
            if isinstance(side, (ast.List, ast.Tuple)) or (isinstance(side, ast.Constant)
                                                           and isinstance(side.value, str)):
                raise _refuse(text, "arithmetic on text or lists")
        left, right = _fold_constants(node.left, text), _fold_constants(node.right, text)
        if left is None or right is None:
            return None
        return _apply_constant(node.op, left, right, text)
    for child in ast.iter_child_nodes(node):
        _fold_constants(child, text)
    return None


def _apply_constant(op: ast.operator, left: float, right: float, text: str) -> float:
    if isinstance(op, ast.Pow):
        if left == 0 and right < 0:
            raise _refuse(text, "0 raised to a negative power")
        if abs(left) > 1 and right * math.log10(abs(left)) > math.log10(_MAX_CONSTANT):
            raise _refuse(text, f"the power {left:g}**{right:g} (beyond ±1e300)")
        if left < 0 and right != int(right):
            raise _refuse(text, f"the power {left:g}**{right:g} (not a real number)")
        value = left ** right
    elif isinstance(op, (ast.Div, ast.Mod)) and right == 0:
        raise _refuse(text, "division by zero")
    elif isinstance(op, (ast.BitAnd, ast.BitOr)):
        raise _refuse(text, "& or | between numbers (they join conditions)")
    else:
        value = {ast.Add: left + right, ast.Sub: left - right, ast.Mult: left * right}.get(type(op), math.nan)
        if isinstance(op, ast.Div):
            value = left / right
        elif isinstance(op, ast.Mod):
            value = math.fmod(left, right)
    if not abs(value) <= _MAX_CONSTANT:
        raise _refuse(text, "a constant beyond ±1e300")
    return value


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

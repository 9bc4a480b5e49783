"""Safe arithmetic expressions of parameter names, for the entries of a plant family's matrices.

A plant file may write a matrix entry as a string such as ``"-spring / mass"``. The text is
parsed with :func:`ast.parse` and then *checked node by node against a short list of admitted
constructs*; anything else is refused before a single value is computed. Nothing is ever
passed to Python's ``eval`` or ``exec``: the checked tree is turned into a small tree of numpy
operations, which evaluates on arrays of parameter values (one value per Monte Carlo sample)
as cheaply as on one number.

Admitted: numbers, parameter names, unary ``+``/``-``, binary ``+ - * / **``, parentheses, calls
of ``sqrt exp log sin cos tan`` with one argument, and the constant ``pi``. Everything else —
attribute access, subscripts, other calls, keyword arguments, lambdas, comparisons, strings,
names starting with ``__`` — is refused with a message naming the entry.

Why not a library (DEVELOPERS.md has the longer note): the evaluators on PyPI made for this
(simpleeval, the best kept) admit a wider grammar by default (attributes, subscripts,
comparisons, strings) that would have to be pruned by a whitelist pass like this one anyway,
and their guards on powers compare scalars, so they cannot evaluate on arrays of samples.
"""

from __future__ import annotations

import ast
import math
from dataclasses import dataclass, field

import numpy as np

from ._errors import PlantError

__all__ = ["EXPRESSION_FUNCTIONS", "MAX_EXPRESSION_LENGTH", "ParameterExpression", "parse_expression"]

#: Longest expression text accepted, in characters; a physical formula for one entry is short.
MAX_EXPRESSION_LENGTH = 300
#: Deepest nesting of operations accepted (keeps evaluation well inside Python's recursion limit).
_MAX_DEPTH = 40

#: The functions an expression may call (one argument each), as numpy functions over arrays.
EXPRESSION_FUNCTIONS = {
    "sqrt": np.sqrt,
    "exp": np.exp,
    "log": np.log,
    "sin": np.sin,
    "cos": np.cos,
    "tan": np.tan,
}
_CONSTANTS = {"pi": math.pi}

_BINARY = {
    ast.Add: np.add,
    ast.Sub: np.subtract,
    ast.Mult: np.multiply,
    ast.Div: np.divide,
    ast.Pow: np.power,
}
_UNARY = {ast.UAdd: np.positive, ast.USub: np.negative}
_SYMBOLS = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**", ast.UAdd: "+", ast.USub: "-"}


def _describe(node: ast.AST) -> str:
    """Plain words for a refused construct."""
    words = {
        ast.Attribute: "attribute access (a.b)",
        ast.Subscript: "subscripts (a[i])",
        ast.Lambda: "lambda functions",
        ast.Compare: "comparisons",
        ast.BoolOp: "and/or",
        ast.IfExp: "if/else expressions",
        ast.Call: "this call",
        ast.Starred: "starred arguments",
        ast.NamedExpr: "assignments (:=)",
        ast.JoinedStr: "f-strings",
        ast.List: "lists",
        ast.Tuple: "tuples",
        ast.Dict: "dictionaries",
        ast.Set: "sets",
        ast.ListComp: "comprehensions",
        ast.GeneratorExp: "generators",
        ast.SetComp: "comprehensions",
        ast.DictComp: "comprehensions",
        ast.Await: "await",
        ast.Yield: "yield",
        ast.Slice: "slices",
    }
    for kind, text in words.items():
        if isinstance(node, kind):
            return text
    if isinstance(node, ast.BinOp):
        return f"the operator {type(node.op).__name__}"
    if isinstance(node, ast.UnaryOp):
        return f"the operator {type(node.op).__name__}"
    if isinstance(node, ast.Constant):
        return f"the constant {node.value!r} (only numbers are allowed)"
    return type(node).__name__


@dataclass(frozen=True)
class ParameterExpression:
    """A checked arithmetic expression of parameter names (see :func:`parse_expression`).

    Attributes
    ----------
    text : str
        The expression as written.
    names : frozenset of str
        The parameter names it uses.
    where : str
        Where it was written, for messages (e.g. ``"[model] A row 2, column 1"``).
    """

    text: str
    names: frozenset
    where: str
    _tree: ast.AST = field(repr=False, compare=False)

    def evaluate(self, values: dict) -> np.ndarray:
        """Value of the expression for ``values`` (name → number or array, all of one shape).

        Floating-point exceptions (division by zero, log of a negative number, overflow) give
        ``inf`` or ``nan`` instead of raising, so one bad sample in an array never stops the
        others; callers check finiteness and say which entry and which values are at fault.

        Parameters
        ----------
        values : dict
            Every name in :attr:`names` mapped to a float or an array of floats.

        Returns
        -------
        numpy.ndarray
            Float array of the broadcast shape of the values (0-d for numbers).

        Examples
        --------
        >>> expression = parse_expression("-spring / mass", {"spring", "mass"}, "A[2,1]")
        >>> float(expression.evaluate({"spring": 8.0, "mass": 2.0}))
        -4.0
        """
        with np.errstate(all="ignore"):
            return np.asarray(_evaluate(self._tree, values), dtype=float)


def _evaluate(node: ast.AST, values: dict):
    # only the node kinds admitted by _check reach here
    if isinstance(node, ast.Constant):
        return float(node.value)
    if isinstance(node, ast.Name):
        return _CONSTANTS[node.id] if node.id in _CONSTANTS else np.asarray(values[node.id], dtype=float)
    if isinstance(node, ast.UnaryOp):
        return _UNARY[type(node.op)](_evaluate(node.operand, values))
    if isinstance(node, ast.BinOp):
        left, right = _evaluate(node.left, values), _evaluate(node.right, values)
        return _BINARY[type(node.op)](np.asarray(left, dtype=float), np.asarray(right, dtype=float))
    return EXPRESSION_FUNCTIONS[node.func.id](_evaluate(node.args[0], values))


def _check(node: ast.AST, known: set, where: str, text: str, depth: int, used: set) -> None:
    """Refuse every construct that is not on the admitted list (a whitelist, not a blacklist)."""
    def refuse(reason: str):
        raise PlantError(f"{where}: {text!r} uses {reason}; an entry may use numbers, parameter names, "
                         "+ - * / ** and parentheses, and sqrt, exp, log, sin, cos, tan, pi")

    if depth > _MAX_DEPTH:
        raise PlantError(f"{where}: {text!r} is nested more than {_MAX_DEPTH} levels deep; simplify it")
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
            refuse(_describe(node))
        if not math.isfinite(float(node.value)):
            refuse(f"the non-finite number {node.value!r}")
        return
    if isinstance(node, ast.Name):
        if node.id.startswith("__"):
            refuse(f"the name {node.id!r} (names starting with __ are never allowed)")
        if node.id in EXPRESSION_FUNCTIONS:
            refuse(f"the function {node.id!r} without calling it")
        if node.id not in known and node.id not in _CONSTANTS:
            names = ", ".join(sorted(known)) or "none are defined"
            raise PlantError(f"{where}: {text!r} uses the unknown name {node.id!r}; "
                             f"the parameters are: {names} (define it under [parameters])")
        if node.id in known:
            used.add(node.id)
        return
    if isinstance(node, ast.UnaryOp):
        if type(node.op) not in _UNARY:
            refuse(f"the operator {type(node.op).__name__}")
        _check(node.operand, known, where, text, depth + 1, used)
        return
    if isinstance(node, ast.BinOp):
        if type(node.op) not in _BINARY:
            symbol = {ast.Mod: "%", ast.FloorDiv: "//", ast.MatMult: "@", ast.BitAnd: "&", ast.BitOr: "|",
                      ast.BitXor: "^", ast.LShift: "<<", ast.RShift: ">>"}.get(type(node.op), type(node.op).__name__)
            refuse(f"the operator {symbol}")
        _check(node.left, known, where, text, depth + 1, used)
        _check(node.right, known, where, text, depth + 1, used)
        return
    if isinstance(node, ast.Call):
        if not isinstance(node.func, ast.Name) or node.func.id not in EXPRESSION_FUNCTIONS:
            refuse("a call of something other than sqrt, exp, log, sin, cos or tan")
        if node.keywords or len(node.args) != 1:
            refuse(f"{node.func.id} with other than exactly one argument")
        _check(node.args[0], known, where, text, depth + 1, used)
        return
    refuse(_describe(node))


def parse_expression(text: str, parameter_names, where: str) -> ParameterExpression:
    """Check an arithmetic expression of parameter names and prepare it for evaluation.

    Parameters
    ----------
    text : str
        The expression, at most :data:`MAX_EXPRESSION_LENGTH` characters.
    parameter_names : iterable of str
        The names it may use.
    where : str
        Where the expression was written; every message starts with it.

    Returns
    -------
    ParameterExpression

    Raises
    ------
    PlantError
        For text that is too long, not an expression, or uses anything besides numbers,
        parameter names, ``+ - * / **``, parentheses and ``sqrt exp log sin cos tan pi``;
        the message names ``where`` and the construct.

    Examples
    --------
    >>> expression = parse_expression("sqrt(g / length)", {"g", "length"}, "A[1,2]")
    >>> sorted(expression.names), round(float(expression.evaluate({"g": 9.81, "length": 9.81})), 12)
    (['g', 'length'], 1.0)
    >>> parse_expression("mass.__class__", {"mass"}, "A[1,1]")
    Traceback (most recent call last):
    ...
    gainboard.core._errors.PlantError: A[1,1]: 'mass.__class__' uses attribute access (a.b); an entry may use numbers, parameter names, + - * / ** and parentheses, and sqrt, exp, log, sin, cos, tan, pi
    """
    if not isinstance(text, str):
        raise PlantError(f"{where}: an expression must be a string, got {text!r}")
    if len(text) > MAX_EXPRESSION_LENGTH:
        raise PlantError(f"{where}: the expression is {len(text)} characters long; at most "
                         f"{MAX_EXPRESSION_LENGTH} are allowed (define a parameter for a long formula)")
    if not text.strip():
        raise PlantError(f"{where}: the expression is empty; write a number or a formula of parameters")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except (SyntaxError, ValueError, MemoryError, RecursionError) as error:
        reason = getattr(error, "msg", None) or type(error).__name__
        raise PlantError(f"{where}: {text!r} is not an arithmetic expression ({reason})") from None
    known = set(parameter_names)
    used: set = set()
    _check(tree.body, known, where, text, 0, used)
    return ParameterExpression(text=text, names=frozenset(used), where=where, _tree=tree.body)

"""Custom merit indices written as formulas: a small, safe arithmetic language.

A formula is parsed with Python's ``ast`` module into a syntax tree, every node of
which is checked against a short whitelist, and then evaluated by walking that tree
with numpy. Nothing is ever compiled to code or handed to ``eval``.

The language
------------
- numbers: ``2``, ``0.5``, ``1e-3`` (all computed as floats);
- quantity names given by the caller, e.g. ``loss_factor``, ``storage_modulus``;
- ``+ - * / **`` and unary ``+ -``, with parentheses;
- functions ``log10 log exp sqrt abs`` of one argument and ``min max`` of two or more
  (elementwise).

Limits: at most ``MAX_LENGTH`` characters and ``MAX_NODES`` syntax-tree nodes; a
constant exponent may not exceed ``MAX_CONSTANT_EXPONENT`` in size and an exponent may
not itself contain a power. Results outside a function's domain (``log`` of a negative
number, say) come out as NaN or inf, never as an error, so one bad grade cannot stop a
ranking.
"""

from __future__ import annotations

import ast
import functools
import keyword
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import NoReturn

import numpy as np
from numpy.typing import ArrayLike, NDArray

from engine.base.errors import CriteriaError

MAX_LENGTH = 500
"""Longest formula text accepted [characters]."""

MAX_NODES = 200
"""Largest syntax tree accepted [nodes]."""

MAX_CONSTANT_EXPONENT = 10.0
"""Largest absolute value of an exponent that contains no quantity names."""

_Value = NDArray[np.float64] | np.float64
"""A formula's value: an array, or a numpy scalar where only constants are involved."""

_UNARY_FUNCTIONS: dict[str, Callable[[_Value], _Value]] = {
    "abs": np.abs,
    "exp": np.exp,
    "log": np.log,
    "log10": np.log10,
    "sqrt": np.sqrt,
}
_VARIADIC_FUNCTIONS: dict[str, Callable[..., _Value]] = {
    "max": np.maximum,
    "min": np.minimum,
}
FUNCTIONS = frozenset(_UNARY_FUNCTIONS) | frozenset(_VARIADIC_FUNCTIONS)
"""Names of the functions a formula may call."""

_BINARY = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}
_UNARY = {ast.UAdd: "+", ast.USub: "-"}
_OPERATOR_SYMBOLS = {
    ast.FloorDiv: "//",
    ast.Mod: "%",
    ast.MatMult: "@",
    ast.LShift: "<<",
    ast.RShift: ">>",
    ast.BitOr: "|",
    ast.BitXor: "^",
    ast.BitAnd: "&",
    ast.Invert: "~",
    ast.Not: "not",
    ast.And: "and",
    ast.Or: "or",
    ast.Eq: "==",
    ast.NotEq: "!=",
    ast.Lt: "<",
    ast.LtE: "<=",
    ast.Gt: ">",
    ast.GtE: ">=",
    ast.Is: "is",
    ast.IsNot: "is not",
    ast.In: "in",
    ast.NotIn: "not in",
}
_CONSTRUCTS = {
    ast.Attribute: "attribute access",
    ast.Subscript: "subscript",
    ast.Slice: "slice",
    ast.Lambda: "lambda",
    ast.ListComp: "comprehension",
    ast.SetComp: "comprehension",
    ast.DictComp: "comprehension",
    ast.GeneratorExp: "comprehension",
    ast.IfExp: "conditional expression",
    ast.NamedExpr: "assignment expression",
    ast.Starred: "starred argument",
    ast.List: "list",
    ast.Tuple: "tuple",
    ast.Set: "set",
    ast.Dict: "dict",
    ast.JoinedStr: "string",
    ast.FormattedValue: "string",
    ast.Await: "await",
    ast.Yield: "yield",
    ast.YieldFrom: "yield",
}
_RESERVED = "names of the form __name__ are reserved"
_ALLOWED_HINT = "allowed: numbers, quantity names, + - * / **, ( ) and functions " + ", ".join(
    sorted(FUNCTIONS)
)


@dataclass(frozen=True)
class Formula:
    """A checked merit-index formula, ready to evaluate.

    Build one with `parse_formula`; do not construct it directly.

    Attributes
    ----------
    text : str
        The formula as written.
    names : frozenset of str
        Quantity names the formula uses.
    """

    text: str
    names: frozenset[str]
    _tree: ast.Expression = field(repr=False, compare=False, hash=False)

    def evaluate(self, values: Mapping[str, ArrayLike]) -> NDArray[np.float64]:
        """Evaluate the formula elementwise.

        Parameters
        ----------
        values : mapping of str to array
            A value (scalar or array) for every name in `names`; extra entries are
            ignored. Arrays broadcast against each other.

        Returns
        -------
        numpy.ndarray of float
            The formula's value, with the broadcast shape of the values used. Entries
            outside a function's domain are NaN or inf.

        Raises
        ------
        CriteriaError
            If a value is missing or not numeric, or the values do not broadcast.
        """
        missing = sorted(self.names - set(values))
        if missing:
            raise CriteriaError(f"formula {self.text!r} needs a value for {', '.join(missing)}")
        arrays = {}
        for name in self.names:
            try:
                arrays[name] = np.asarray(values[name], dtype=float)
            except (TypeError, ValueError) as exc:
                raise CriteriaError(
                    f"value for {name!r} in formula {self.text!r} is not numeric"
                ) from exc
        try:
            shape = np.broadcast_shapes(*(a.shape for a in arrays.values()))
        except ValueError as exc:
            shapes = ", ".join(f"{n} {arrays[n].shape}" for n in sorted(arrays))
            raise CriteriaError(
                f"values for formula {self.text!r} do not broadcast together: {shapes}"
            ) from exc
        with np.errstate(all="ignore"):
            result = _evaluate(self._tree.body, arrays)
        return np.array(np.broadcast_to(result, shape), dtype=float)


def parse_formula(text: str, allowed_names: Iterable[str]) -> Formula:
    """Parse and check a merit-index formula.

    Parameters
    ----------
    text : str
        The formula, e.g. ``"loss_factor * storage_modulus ** 0.5 / density"``.
    allowed_names : iterable of str
        Quantity names the formula may use.

    Returns
    -------
    Formula

    Raises
    ------
    CriteriaError
        If the text is empty, too long or too large, not valid syntax, or uses anything
        outside the language (see the module docstring). The message names the
        offending word or operator and its 1-based column.
    """
    allowed = _check_allowed_names(allowed_names)
    if not isinstance(text, str):
        raise CriteriaError(f"formula must be text; got {type(text).__name__}")
    if not text.strip():
        raise CriteriaError("formula is empty; write an expression such as 'loss_factor * 2'")
    if len(text) > MAX_LENGTH:
        raise CriteriaError(
            f"formula is {len(text)} characters long; at most {MAX_LENGTH} are accepted"
        )
    body = text.rstrip()
    stripped = body.lstrip()
    lead = len(body) - len(stripped)
    for position, char in enumerate(body):
        if char in "\r\n\x0b\x0c":
            raise CriteriaError(
                f"formula must be written on one line; line break at column {position + 1}"
            )
    try:
        tree = ast.parse(stripped, mode="eval")
    except SyntaxError as exc:
        where = (
            f" at column {exc.offset + lead}"
            if exc.offset and 0 < exc.offset <= len(stripped)
            else " at the end"
        )
        raise CriteriaError(f"formula {text!r} is not valid{where}: {exc.msg}") from exc
    except (ValueError, RecursionError, MemoryError) as exc:
        raise CriteriaError(f"formula {text!r} cannot be read: {exc}") from exc
    count = sum(1 for node in ast.walk(tree) if isinstance(node, ast.expr))
    if count > MAX_NODES:
        raise CriteriaError(
            f"formula has {count} terms and operators; at most {MAX_NODES} are accepted"
        )
    checker = _Checker(stripped, lead, allowed)
    checker.check(tree.body)
    return Formula(text=text, names=frozenset(checker.used), _tree=tree)


def _check_allowed_names(allowed_names: Iterable[str]) -> frozenset[str]:
    if isinstance(allowed_names, str):
        raise CriteriaError("allowed_names must be a collection of names, not one string")
    allowed = frozenset(allowed_names)
    for name in allowed:
        if (
            not isinstance(name, str)
            or not name.isidentifier()
            or keyword.iskeyword(name)
            or _is_dunder(name)
        ):
            raise CriteriaError(
                f"quantity name {name!r} cannot be used in formulas; names must be "
                "identifiers (letters, digits, underscores) that are not keywords"
            )
    return allowed


def _is_dunder(name: str) -> bool:
    """True for names of the reserved ``__name__`` form."""
    return len(name) > 4 and name.startswith("__") and name.endswith("__")


class _Checker:
    """Walks a syntax tree and raises CriteriaError at the first construct not allowed."""

    def __init__(self, source: str, lead: int, allowed: frozenset[str]) -> None:
        self.source = source
        self.encoded = source.encode("utf-8")
        self.lead = lead
        self.allowed = allowed
        self.used: set[str] = set()

    def column(self, byte_offset: int) -> int:
        """1-based character column in the original text of an ast byte offset."""
        characters = len(self.encoded[:byte_offset].decode("utf-8", errors="replace"))
        return characters + self.lead + 1

    def at(self, node: ast.expr | ast.keyword) -> str:
        return f"at column {self.column(node.col_offset)}"

    def segment(self, node: ast.AST) -> str:
        text = ast.get_source_segment(self.source, node) or type(node).__name__
        return text if len(text) <= 40 else text[:37] + "..."

    def fail(self, message: str) -> NoReturn:
        raise CriteriaError(f"{message}; {_ALLOWED_HINT}")

    def operator_column(self, left: ast.expr, right: ast.expr) -> int:
        """Column of the operator written between two operands."""
        start, stop = left.end_col_offset or 0, right.col_offset
        between = self.encoded[start:stop].decode("utf-8", errors="replace")
        skipped = len(between) - len(between.lstrip(" \t)"))
        head = len(self.encoded[:start].decode("utf-8", errors="replace"))
        return head + skipped + self.lead + 1

    def check(self, node: ast.expr) -> None:
        if isinstance(node, ast.Constant):
            self.check_constant(node)
        elif isinstance(node, ast.Name):
            self.check_name(node)
        elif isinstance(node, ast.BinOp):
            self.check_binary(node)
        elif isinstance(node, ast.UnaryOp):
            if type(node.op) not in _UNARY:
                symbol = _OPERATOR_SYMBOLS.get(type(node.op), type(node.op).__name__)
                self.fail(f"operator '{symbol}' {self.at(node)} is not allowed")
            self.check(node.operand)
        elif isinstance(node, ast.Call):
            self.check_call(node)
        elif isinstance(node, ast.Compare):
            symbol = _OPERATOR_SYMBOLS.get(type(node.ops[0]), "comparison")
            column = self.operator_column(node.left, node.comparators[0])
            self.fail(f"comparison '{symbol}' at column {column} is not allowed")
        elif isinstance(node, ast.BoolOp):
            symbol = _OPERATOR_SYMBOLS[type(node.op)]
            column = self.operator_column(node.values[0], node.values[1])
            self.fail(f"boolean operator '{symbol}' at column {column} is not allowed")
        else:
            what = _CONSTRUCTS.get(type(node), type(node).__name__)
            self.fail(f"{what} {self.segment(node)!r} {self.at(node)} is not allowed")

    def check_constant(self, node: ast.Constant) -> None:
        value = node.value
        if isinstance(value, bool) or value is None or value is Ellipsis:
            self.fail(f"constant {self.segment(node)!r} {self.at(node)} is not allowed")
        if isinstance(value, str | bytes):
            self.fail(f"string {self.segment(node)!r} {self.at(node)} is not allowed")
        if isinstance(value, complex):
            self.fail(f"complex number {self.segment(node)!r} {self.at(node)} is not allowed")
        if not isinstance(value, int | float):
            self.fail(f"constant {self.segment(node)!r} {self.at(node)} is not allowed")
        try:
            number = float(value)
        except OverflowError:
            self.fail(f"number {self.segment(node)[:20]!r} {self.at(node)} is too large")
        if not np.isfinite(number):
            self.fail(f"number {self.segment(node)[:20]!r} {self.at(node)} is too large")

    def check_name(self, node: ast.Name) -> None:
        name = node.id
        if _is_dunder(name):
            self.fail(f"name '{name}' {self.at(node)} is not allowed: {_RESERVED}")
        if name in self.allowed:
            self.used.add(name)
            return
        if name in FUNCTIONS:
            raise CriteriaError(f"'{name}' {self.at(node)} is a function; call it as {name}(...)")
        valid = ", ".join(sorted(self.allowed)) or "(none)"
        raise CriteriaError(f"unknown quantity '{name}' {self.at(node)}; valid names: {valid}")

    def check_binary(self, node: ast.BinOp) -> None:
        column = self.operator_column(node.left, node.right)
        if type(node.op) not in _BINARY:
            symbol = _OPERATOR_SYMBOLS.get(type(node.op), type(node.op).__name__)
            self.fail(f"operator '{symbol}' at column {column} is not allowed")
        self.check(node.left)
        self.check(node.right)
        if isinstance(node.op, ast.Pow):
            self.check_exponent(node.right, column)

    def check_exponent(self, exponent: ast.expr, column: int) -> None:
        for inner in ast.walk(exponent):
            if isinstance(inner, ast.BinOp) and isinstance(inner.op, ast.Pow):
                raise CriteriaError(
                    f"exponent of '**' at column {column} contains another power "
                    f"{self.segment(exponent)!r}; nested powers are not allowed"
                )
        functions = {id(inner.func) for inner in ast.walk(exponent) if isinstance(inner, ast.Call)}
        if any(
            isinstance(inner, ast.Name) and id(inner) not in functions
            for inner in ast.walk(exponent)
        ):
            return  # the exponent depends on a quantity: evaluated in floats, never bounded
        with np.errstate(all="ignore"):
            value = float(_evaluate(exponent, {}))
        if not (np.isfinite(value) and abs(value) <= MAX_CONSTANT_EXPONENT):
            raise CriteriaError(
                f"exponent {self.segment(exponent)!r} of '**' at column {column} is "
                f"{value:g}; constant exponents must lie within "
                f"-{MAX_CONSTANT_EXPONENT:g} to {MAX_CONSTANT_EXPONENT:g}"
            )

    def check_call(self, node: ast.Call) -> None:
        if not isinstance(node.func, ast.Name):
            self.check(node.func)  # attribute access and friends fail with their own name
            self.fail(f"call of {self.segment(node.func)!r} {self.at(node)} is not allowed")
        name = node.func.id
        if _is_dunder(name):
            self.fail(f"name '{name}' {self.at(node)} is not allowed: {_RESERVED}")
        if name not in FUNCTIONS:
            if name in self.allowed:
                raise CriteriaError(
                    f"'{name}' {self.at(node)} is a quantity, not a function; "
                    f"functions: {', '.join(sorted(FUNCTIONS))}"
                )
            raise CriteriaError(
                f"unknown function '{name}' {self.at(node)}; "
                f"functions: {', '.join(sorted(FUNCTIONS))}"
            )
        if node.keywords:
            keyword_node = node.keywords[0]
            label = keyword_node.arg if keyword_node.arg is not None else "**"
            raise CriteriaError(
                f"keyword argument '{label}' of {name}() {self.at(keyword_node)} is not "
                "allowed; pass values by position"
            )
        for argument in node.args:
            if isinstance(argument, ast.Starred):
                raise CriteriaError(
                    f"starred argument {self.segment(argument)!r} of {name}() "
                    f"{self.at(argument)} is not allowed"
                )
        for argument in node.args:
            self.check(argument)
        if name in _UNARY_FUNCTIONS and len(node.args) != 1:
            raise CriteriaError(
                f"{name}() {self.at(node)} takes exactly 1 argument; got {len(node.args)}"
            )
        if name in _VARIADIC_FUNCTIONS and len(node.args) < 2:
            raise CriteriaError(
                f"{name}() {self.at(node)} takes 2 or more arguments; got {len(node.args)}"
            )


def _evaluate(node: ast.expr, arrays: Mapping[str, NDArray[np.float64]]) -> _Value:
    """Value of a checked syntax tree; only the whitelisted node types can occur."""
    if isinstance(node, ast.Constant):
        if not isinstance(node.value, int | float):
            raise CriteriaError(f"internal: unchecked constant {node.value!r} in formula")
        return np.float64(node.value)
    if isinstance(node, ast.Name):
        return arrays[node.id]
    if isinstance(node, ast.UnaryOp):
        operand = _evaluate(node.operand, arrays)
        return -operand if isinstance(node.op, ast.USub) else +operand
    if isinstance(node, ast.BinOp):
        left = _evaluate(node.left, arrays)
        right = _evaluate(node.right, arrays)
        if isinstance(node.op, ast.Add):
            return np.add(left, right)
        if isinstance(node.op, ast.Sub):
            return np.subtract(left, right)
        if isinstance(node.op, ast.Mult):
            return np.multiply(left, right)
        if isinstance(node.op, ast.Div):
            return np.divide(left, right)
        return np.power(np.asarray(left, dtype=float), np.asarray(right, dtype=float))
    if isinstance(node, ast.Call):
        if not isinstance(node.func, ast.Name):
            raise CriteriaError("internal: unchecked call in formula")
        name = node.func.id
        arguments = [_evaluate(argument, arrays) for argument in node.args]
        if name in _UNARY_FUNCTIONS:
            return _UNARY_FUNCTIONS[name](arguments[0])
        return functools.reduce(_VARIADIC_FUNCTIONS[name], arguments)
    raise CriteriaError(f"internal: unchecked node {type(node).__name__} in formula")

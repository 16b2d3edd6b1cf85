"""A small, safe expression language evaluated column-wise over awkward arrays.

Expressions appear in analysis configs (selection steps, derived quantities, histogram
axes). They are parsed by our own tokenizer and recursive-descent parser into a tree of
whitelisted operations; nothing is ever handed to ``eval``.

Grammar (lowest precedence first)::

    expr     := or
    or       := and ("or" and)*
    and      := not ("and" not)*
    not      := "not" not | compare
    compare  := sum (("<" | "<=" | ">" | ">=" | "==" | "!=") sum)*     # chains: 60 < m < 120
    sum      := product (("+" | "-") product)*
    product  := unary (("*" | "/") unary)*
    unary    := ("-" | "+") unary | power
    power    := postfix ("**" unary)?
    postfix  := atom ("." NAME | "[" INTEGER "]")*
    atom     := NUMBER | NAME | NAME "(" args ")" | "(" expr ")" | "pi"

Limits: at most ``MAX_LENGTH`` characters, ``MAX_TOKENS`` tokens, ``MAX_NESTING``
levels of parentheses / ``not`` / signs and a tree ``MAX_DEPTH`` operations deep (a chain
of 1 000 ``+`` is a config error, not a crash). Constant sub-expressions are computed
when the expression is read (``2 * pi`` becomes one number), so that ``1/0``,
``10**10**10``, ``0**-1`` or ``sqrt(-1)`` are errors of the config, pointing at the
operation.

Names refer to collections, composites, quantities or event fields supplied by the
caller through a resolver. ``jets[0]`` is the leading object (missing when an event has
fewer objects); ``jets.pt`` is every object's pT. Adding two objects adds their
four-momenta. Missing values (``None``) propagate; a selection step treats them as failing.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError
from evtkin.select import kinematics as kin

__all__ = [
    "ATTRIBUTES",
    "BOOLEAN_KINDS",
    "FUNCTIONS",
    "Expression",
    "ExpressionError",
    "Node",
    "evaluate",
    "parse",
]


class ExpressionError(ConfigError):
    """An expression could not be parsed or evaluated; points at the offending token."""

    def __init__(self, message: str, text: str, column: int) -> None:
        self.reason = message
        self.text = text
        self.column = column  # 0-based offset into ``text``
        super().__init__(self.render())

    def render(self, prefix: str = "") -> str:
        caret = " " * self.column + "^"
        return (
            f"{prefix}{self.reason} (column {self.column + 1})\n"
            f"    {self.text}\n"
            f"    {caret}"
        )


# --------------------------------------------------------------------------- tokens

@dataclass(frozen=True)
class Token:
    kind: str  # "num", "name", "op", "end"
    value: str
    pos: int


MAX_LENGTH = 10_000
MAX_TOKENS = 2_000
MAX_NESTING = 40
MAX_DEPTH = 200
_MAX_INDEX_DIGITS = 6

_OPS = ("**", "<=", ">=", "==", "!=", "+", "-", "*", "/", "<", ">", "(", ")", "[", "]", ",", ".")
_KEYWORDS = {"and", "or", "not"}


def tokenize(text: str) -> list[Token]:
    """Split ``text`` into tokens; raise ExpressionError at the first bad character."""
    tokens: list[Token] = []
    i, n = 0, len(text)
    if n > MAX_LENGTH:
        raise ExpressionError(
            f"expression too long ({n} characters; at most {MAX_LENGTH})", text, MAX_LENGTH
        )
    while i < n:
        if len(tokens) >= MAX_TOKENS:
            raise ExpressionError(
                f"expression too long (more than {MAX_TOKENS} tokens)", text, tokens[-1].pos
            )
        c = text[i]
        if c.isspace():
            i += 1
            continue
        if c.isdigit() or (c == "." and i + 1 < n and text[i + 1].isdigit()):
            j = i
            while j < n and (text[j].isdigit() or text[j] == "."):
                j += 1
            if j < n and text[j] in "eE":
                k = j + 1
                if k < n and text[k] in "+-":
                    k += 1
                if k < n and text[k].isdigit():
                    j = k
                    while j < n and text[j].isdigit():
                        j += 1
            literal = text[i:j]
            try:
                float(literal)
            except ValueError:
                raise ExpressionError(f"bad number {literal!r}", text, i) from None
            if j < n and (text[j].isalpha() or text[j] == "_"):
                raise ExpressionError("a number cannot run into a name", text, j)
            tokens.append(Token("num", literal, i))
            i = j
            continue
        if c.isalpha() or c == "_":
            j = i
            while j < n and (text[j].isalnum() or text[j] == "_"):
                j += 1
            tokens.append(Token("name", text[i:j], i))
            i = j
            continue
        for op in _OPS:
            if text.startswith(op, i):
                tokens.append(Token("op", op, i))
                i += len(op)
                break
        else:
            hint = ""
            if c in "&|!":
                hint = "; write 'and', 'or', 'not'"
            elif c == "=":
                hint = "; write '==' to compare"
            raise ExpressionError(f"unexpected character {c!r}{hint}", text, i)
    tokens.append(Token("end", "", n))
    return tokens


# --------------------------------------------------------------------------- tree

@dataclass(frozen=True)
class Node:
    """One operation of the tree. ``pos`` is the 0-based column of its token."""

    kind: str  # num, name, attr, index, call, binop, neg, compare, and, or, not
    pos: int
    value: Any = None  # number, name, attribute, index, function name, operator(s)
    args: tuple[Node, ...] = field(default_factory=tuple)


def _charge(obj: Any) -> Any:
    """Electric charge from the PDG id (PDG numbering scheme: 11, 13, 15 are ℓ⁻; quarks 1-6
    d u s c b t with charges -1/3, +2/3; 24 is W⁺; antiparticles have negative ids)."""
    pid = obj["pdgid"]
    a = np.abs(pid)
    sign = np.sign(pid)
    q = (
        ak.where((a == 11) | (a == 13) | (a == 15), -1.0, 0.0)
        + ak.where((a == 2) | (a == 4) | (a == 6), 2.0 / 3.0, 0.0)
        + ak.where((a == 1) | (a == 3) | (a == 5), -1.0 / 3.0, 0.0)
        + ak.where(a == 24, 1.0, 0.0)
    )
    return q * sign


# Attributes with a meaning of their own (computed from the four-momentum; record fields of the
# same name are not used, e.g. ``.mass`` is the four-vector mass, not the file's mass column).
ATTRIBUTES: dict[str, Callable[[Any], Any]] = {
    "pt": kin.pt,
    "eta": kin.eta,
    "phi": kin.phi,
    "mass": kin.mass,
    "rapidity": kin.rapidity,
    "y": kin.rapidity,
    "energy": kin.energy,
    "E": kin.energy,
    "px": lambda o: kin.transverse_components(o)[0],
    "py": lambda o: kin.transverse_components(o)[1],
    "pz": lambda o: kin.components(o)[2],
    "p": kin.p,
}

# function name -> (min args, max args, description)
FUNCTIONS: dict[str, tuple[int, int, str]] = {
    "abs": (1, 1, "absolute value"),
    "sqrt": (1, 1, "square root"),
    "log": (1, 1, "natural logarithm"),
    "exp": (1, 1, "exponential"),
    "cos": (1, 1, "cosine"),
    "sin": (1, 1, "sine"),
    "min": (1, 8, "smallest per event (one collection) or element-wise (several values)"),
    "max": (1, 8, "largest per event (one collection) or element-wise (several values)"),
    "count": (1, 1, "number of objects per event"),
    "sum": (1, 1, "sum over the objects of each event"),
    "prod": (1, 1, "product over the objects of each event (1 for none)"),
    "lookup": (2, 4, "the value of a binned table ([tables]) at one value per table axis"),
    "mass": (1, 1, "invariant mass"),
    "pt": (1, 1, "transverse momentum"),
    "eta": (1, 1, "pseudorapidity"),
    "rapidity": (1, 1, "rapidity"),
    "phi": (1, 1, "azimuth"),
    "deltaR": (2, 2, "ΔR = √(Δη² + Δφ²)"),
    "deltaR_y": (2, 2, "ΔR with rapidity instead of pseudorapidity"),
    "deltaPhi": (2, 2, "Δφ wrapped into (-π, π]"),
    "deltaEta": (2, 2, "Δη"),
    "cos_theta_star": (2, 3, "cos θ* of a daughter in its parent's rest frame, axis = the "
                       "parent's direction in the lab or in the rest frame of a third object"),
    "cos_theta_cs": (2, 2, "cos θ of the negative lepton in the Collins–Soper frame (ℓ⁻, ℓ⁺)"),
    "ht": (1, 1, "scalar sum of pT of a collection"),
    "mt": (2, 2, "transverse mass of two objects"),
}

_CONSTANTS = {"pi": math.pi}


class _Parser:
    def __init__(self, text: str) -> None:
        self.text = text
        self.tokens = tokenize(text)
        self.i = 0
        self.nesting = 0

    def enter(self) -> None:
        self.nesting += 1
        if self.nesting > MAX_NESTING:
            raise self.error(f"expression nested too deeply (more than {MAX_NESTING} levels)")

    def peek(self) -> Token:
        return self.tokens[self.i]

    def take(self) -> Token:
        tok = self.tokens[self.i]
        self.i += 1
        return tok

    def error(self, message: str, tok: Token | None = None) -> ExpressionError:
        tok = tok or self.peek()
        return ExpressionError(message, self.text, tok.pos)

    def accept(self, value: str) -> Token | None:
        tok = self.peek()
        if tok.kind in ("op", "name") and tok.value == value:
            self.i += 1
            return tok
        return None

    def expect(self, value: str, what: str) -> Token:
        tok = self.accept(value)
        if tok is None:
            got = self.peek()
            shown = "end of expression" if got.kind == "end" else repr(got.value)
            raise self.error(f"expected {what}, found {shown}")
        return tok

    # grammar ------------------------------------------------------------
    def parse(self) -> Node:
        if self.peek().kind == "end":
            raise self.error("empty expression")
        node = self.or_()
        tok = self.peek()
        if tok.kind != "end":
            raise self.error(f"unexpected {tok.value!r} after a complete expression")
        return node

    def or_(self) -> Node:
        self.enter()
        node = self.and_()
        while (tok := self.accept("or")) is not None:
            node = Node("or", tok.pos, None, (node, self.and_()))
        self.nesting -= 1
        return node

    def and_(self) -> Node:
        node = self.not_()
        while (tok := self.accept("and")) is not None:
            node = Node("and", tok.pos, None, (node, self.not_()))
        return node

    def not_(self) -> Node:
        tok = self.accept("not")
        if tok is not None:
            self.enter()
            node = Node("not", tok.pos, None, (self.not_(),))
            self.nesting -= 1
            return node
        return self.compare()

    def compare(self) -> Node:
        first = self.sum_()
        ops: list[str] = []
        operands = [first]
        while self.peek().kind == "op" and self.peek().value in ("<", "<=", ">", ">=", "==", "!="):
            ops.append(self.take().value)
            operands.append(self.sum_())
        if not ops:
            return first
        return Node("compare", first.pos, tuple(ops), tuple(operands))

    def sum_(self) -> Node:
        node = self.product()
        while self.peek().kind == "op" and self.peek().value in ("+", "-"):
            tok = self.take()
            node = Node("binop", tok.pos, tok.value, (node, self.product()))
        return node

    def product(self) -> Node:
        node = self.unary()
        while self.peek().kind == "op" and self.peek().value in ("*", "/"):
            tok = self.take()
            node = Node("binop", tok.pos, tok.value, (node, self.unary()))
        return node

    def unary(self) -> Node:
        tok = self.peek()
        if tok.kind == "op" and tok.value in ("-", "+"):
            self.take()
            self.enter()
            operand = self.unary()
            self.nesting -= 1
            if tok.value == "+":
                return operand
            if operand.kind == "num":
                return Node("num", tok.pos, -operand.value)
            return Node("neg", tok.pos, None, (operand,))
        return self.power()

    def power(self) -> Node:
        node = self.postfix()
        tok = self.accept("**")
        if tok is not None:
            self.enter()
            node = Node("binop", tok.pos, "**", (node, self.unary()))
            self.nesting -= 1
        return node

    def postfix(self) -> Node:
        node = self.atom()
        while True:
            if self.accept(".") is not None:
                tok = self.take()
                if tok.kind != "name" or tok.value in _KEYWORDS:
                    raise self.error("expected an attribute name after '.'", tok)
                node = Node("attr", tok.pos, tok.value, (node,))
            elif (open_ := self.accept("[")) is not None:
                sign = -1 if self.accept("-") is not None else 1
                tok = self.take()
                if tok.kind != "num" or not tok.value.isdigit():
                    raise self.error("expected a whole-number index such as [0] or [-1]", tok)
                if len(tok.value.lstrip("0")) > _MAX_INDEX_DIGITS:
                    raise self.error(
                        f"index too large (at most {_MAX_INDEX_DIGITS} digits)", tok
                    )
                self.expect("]", "']'")
                node = Node("index", open_.pos, sign * int(tok.value), (node,))
            else:
                return node

    def atom(self) -> Node:
        tok = self.take()
        if tok.kind == "num":
            return Node("num", tok.pos, float(tok.value))
        if tok.kind == "name" and tok.value not in _KEYWORDS:
            if self.peek().kind == "op" and self.peek().value == "(":
                return self.call(tok)
            if tok.value in _CONSTANTS:
                return Node("num", tok.pos, _CONSTANTS[tok.value])
            return Node("name", tok.pos, tok.value)
        if tok.kind == "op" and tok.value == "(":
            node = self.or_()
            self.expect(")", "')'")
            return node
        shown = "end of expression" if tok.kind == "end" else repr(tok.value)
        raise self.error(f"expected a number, a name or '(', found {shown}", tok)

    def call(self, name: Token) -> Node:
        if name.value not in FUNCTIONS:
            close = difflib.get_close_matches(name.value, list(FUNCTIONS), n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            known = ", ".join(sorted(FUNCTIONS))
            raise self.error(f"unknown function {name.value!r}{hint} (known: {known})", name)
        self.expect("(", "'('")
        args: list[Node] = []
        if self.accept(")") is None:
            while True:
                args.append(self.or_())
                if self.accept(")") is not None:
                    break
                self.expect(",", "',' or ')'")
        lo, hi, _ = FUNCTIONS[name.value]
        if name.value == "lookup" and args and args[0].kind != "name":
            raise self.error("lookup() takes the name of a table first, e.g. "
                             "lookup(muon_sf, muons.pt)", name)
        if not lo <= len(args) <= hi:
            want = str(lo) if lo == hi else f"{lo} to {hi}"
            raise self.error(
                f"{name.value}() takes {want} argument(s), {len(args)} given", name
            )
        return Node("call", name.pos, name.value, tuple(args))


def _names(node: Node, out: dict[str, int]) -> None:
    if node.kind == "name":
        out.setdefault(node.value, node.pos)
    for arg in node.args:
        _names(arg, out)


@dataclass(frozen=True)
class Expression:
    """A parsed expression: its source text, tree and the names it refers to."""

    text: str
    tree: Node
    #: where the expression was written (``config.toml:12: step[0].require``), for errors
    #: found while evaluating; set by the config reader
    where: str = field(default="", compare=False)

    @property
    def names(self) -> dict[str, int]:
        """Free names → 0-based column of their first use."""
        out: dict[str, int] = {}
        _names(self.tree, out)
        return out

    def error(self, message: str, column: int) -> ExpressionError:
        return ExpressionError(message, self.text, column)

    def __str__(self) -> str:
        return self.text


def _depth(tree: Node) -> tuple[int, int]:
    """(depth of the tree, column of its deepest node), without recursion."""
    best, col = 0, tree.pos
    stack = [(tree, 1)]
    while stack:
        node, d = stack.pop()
        if d > best:
            best, col = d, node.pos
        stack.extend((a, d + 1) for a in node.args)
    return best, col


_FOLD_FUNCS: dict[str, Callable[[float], float]] = {
    "abs": abs, "sqrt": math.sqrt, "log": math.log, "exp": math.exp,
    "cos": math.cos, "sin": math.sin,
}  # fmt: skip


def _constant(value: Any, text: str, pos: int, what: str) -> Any:
    if isinstance(value, complex):
        raise ExpressionError(f"{what} is not a real number", text, pos)
    if isinstance(value, float) and not math.isfinite(value):
        raise ExpressionError(f"{what} is not a finite number ({value})", text, pos)
    return value


def _fold(node: Node, text: str) -> Node:
    """``node`` with its constant sub-expressions computed (errors point at the operation)."""
    if not node.args:
        return node
    args = tuple(_fold(a, text) for a in node.args)
    if args != node.args:
        node = Node(node.kind, node.pos, node.value, args)
    if not all(a.kind == "num" for a in args):
        return node
    vals = [a.value for a in args]
    kind, op = node.kind, node.value
    try:
        if kind == "binop":
            a, b = float(vals[0]), float(vals[1])
            out = {"+": a + b, "-": a - b, "*": a * b}.get(op) if op not in ("/", "**") else None
            if op == "/":
                if b == 0:
                    raise ExpressionError("division by zero in a constant", text, node.pos)
                out = a / b
            elif op == "**":
                if a == 0 and b < 0:
                    raise ExpressionError("0 to a negative power in a constant", text, node.pos)
                out = a**b
            return Node("num", node.pos, _constant(out, text, node.pos, "this constant"))
        if kind == "neg":
            return Node("num", node.pos, -float(vals[0]))
        if kind == "call" and op in _FOLD_FUNCS:
            out = _FOLD_FUNCS[op](float(vals[0]))
            return Node("num", node.pos, _constant(out, text, node.pos, f"{op}() of a constant"))
        if kind == "call" and op in ("min", "max") and len(vals) > 1:
            return Node("num", node.pos, (min if op == "min" else max)(vals))
        if kind == "compare":
            result = all(
                _CMP[o](x, y) for o, x, y in zip(op, vals[:-1], vals[1:], strict=False)
            )
            return Node("num", node.pos, bool(result))
    except ExpressionError:
        raise
    except OverflowError:
        raise ExpressionError("this constant is too large", text, node.pos) from None
    except (ValueError, ZeroDivisionError) as exc:
        raise ExpressionError(f"cannot compute this constant: {exc}", text, node.pos) from None
    return node


def parse(text: str) -> Expression:
    """Parse ``text`` into an :class:`Expression`; raise :class:`ExpressionError` if invalid.

    Constant sub-expressions are computed here (see the module docstring)."""
    if not isinstance(text, str):
        raise TypeError("expression must be a string")
    tree = _Parser(text).parse()
    depth, col = _depth(tree)
    if depth > MAX_DEPTH:
        raise ExpressionError(
            f"expression too deep ({depth} nested operations; at most {MAX_DEPTH})", text, col
        )
    return Expression(text, _fold(tree, text))


#: node kinds whose value is true/false
BOOLEAN_KINDS = frozenset({"compare", "and", "or", "not"})


# --------------------------------------------------------------------------- evaluation

Resolver = Callable[[str], Any]


def _is_record(value: Any) -> bool:
    return isinstance(value, ak.Array) and len(ak.fields(value)) > 0


def _ndim(value: Any) -> int:
    if isinstance(value, ak.Array):
        return int(value.ndim)
    return int(np.ndim(value))


def _field(value: Any, name: str, expr: Expression, pos: int) -> Any:
    if not isinstance(value, ak.Array) or not ak.fields(value):
        raise expr.error(f"'.{name}' needs an object or a collection of objects", pos)
    fields = ak.fields(value)
    if name in ATTRIBUTES:
        try:
            return ATTRIBUTES[name](value)
        except TypeError:
            if name not in fields:
                raise expr.error(
                    f"'.{name}' needs four-momenta; these records have {', '.join(fields)}", pos
                ) from None
    if name in fields:
        return value[name]
    if name == "charge" and "pdgid" in fields:
        return _charge(value)
    choices = sorted(set(fields) | set(ATTRIBUTES))
    close = difflib.get_close_matches(name, choices, n=1)
    hint = f"; did you mean {close[0]!r}?" if close else ""
    raise expr.error(f"objects have no attribute {name!r}{hint}", pos)


def _index(value: Any, i: int, expr: Expression, pos: int) -> Any:
    if not isinstance(value, ak.Array) or value.ndim < 2:
        raise expr.error("only a collection (several objects per event) can be indexed", pos)
    stop = i + 1 if i != -1 else None
    return ak.firsts(value[:, i:stop], axis=1)


def _reduce(fn: str, value: Any, expr: Expression, pos: int) -> Any:
    if _ndim(value) < 2:
        raise expr.error(f"{fn}() of one argument needs a collection, e.g. {fn}(jets.pt)", pos)
    if fn == "sum":
        return ak.sum(value, axis=1)
    if fn == "prod":
        return ak.prod(value, axis=1)
    if fn == "min":
        return ak.min(value, axis=1)
    return ak.max(value, axis=1)


def _elementwise(fn: str, values: list[Any]) -> Any:
    out = values[0]
    for v in values[1:]:
        if isinstance(out, ak.Array) or isinstance(v, ak.Array):
            pick = out < v if fn == "min" else out > v
            out = ak.where(pick, out, v)
        else:
            out = np.minimum(out, v) if fn == "min" else np.maximum(out, v)
    return out


def _need_vectors(fn: str, values: list[Any], expr: Expression, pos: int) -> None:
    for v in values:
        if not _is_record(v):
            raise expr.error(f"{fn}() needs objects (four-momenta), not numbers", pos)


_PAIR_FUNCTIONS: dict[str, Callable[..., Any]] = {
    "deltaR": kin.delta_r,
    "deltaR_y": kin.delta_r_rapidity,
    "deltaPhi": kin.delta_phi,
    "deltaEta": kin.delta_eta,
    "mt": kin.transverse_mass,
    "cos_theta_star": kin.cos_theta_star,
    "cos_theta_cs": kin.collins_soper_cos_theta,
}


def _call(fn: str, values: list[Any], expr: Expression, pos: int) -> Any:
    if fn in ("abs", "sqrt", "log", "exp", "cos", "sin"):
        v = values[0]
        if _is_record(v):
            raise expr.error(f"{fn}() needs a number, not objects", pos)
        ufunc = {"abs": np.abs, "sqrt": np.sqrt, "log": np.log, "exp": np.exp,
                 "cos": np.cos, "sin": np.sin}[fn]
        with np.errstate(invalid="ignore", divide="ignore"):
            return ufunc(v)
    if fn in ("min", "max"):
        if len(values) == 1:
            return _reduce(fn, values[0], expr, pos)
        return _elementwise(fn, values)
    if fn in ("sum", "prod"):
        return _reduce(fn, values[0], expr, pos)
    if fn == "lookup":
        table, args = values[0], values[1:]
        if not callable(table) or not hasattr(table, "ndim"):
            raise expr.error("lookup() needs a table declared under [tables] first", pos)
        if len(args) != table.ndim:
            raise expr.error(f"table {table.name!r} has {table.ndim} axes "
                             f"({', '.join(table.axis_names)}); give one value for each", pos)
        for a in args:
            if _is_record(a):
                raise expr.error("lookup() needs numbers (e.g. muons.pt), not objects", pos)
        return table(*args)
    if fn == "count":
        v = values[0]
        if _ndim(v) < 2:
            raise expr.error("count() needs a collection", pos)
        return ak.num(v, axis=1)
    _need_vectors(fn, values, expr, pos)
    try:
        if fn in ("mass", "pt", "eta", "rapidity", "phi"):
            return ATTRIBUTES[fn](values[0])
        if fn == "ht":
            if _ndim(values[0]) < 2:
                raise expr.error("ht() needs a collection", pos)
            return kin.ht(values[0], axis=1)
        return _PAIR_FUNCTIONS[fn](*values)
    except TypeError as exc:
        raise expr.error(f"{fn}(): {exc}", pos) from None


_BINOPS: dict[str, Callable[[Any, Any], Any]] = {
    "+": lambda a, b: a + b,
    "-": lambda a, b: a - b,
    "*": lambda a, b: a * b,
    "/": lambda a, b: a / b,
    "**": lambda a, b: a**b,
}
_CMP: dict[str, Callable[[Any, Any], Any]] = {
    "<": lambda a, b: a < b,
    "<=": lambda a, b: a <= b,
    ">": lambda a, b: a > b,
    ">=": lambda a, b: a >= b,
    "==": lambda a, b: a == b,
    "!=": lambda a, b: a != b,
}


def _bool(value: Any, expr: Expression, pos: int) -> Any:
    if _is_record(value):
        raise expr.error("objects cannot be used as true/false; compare a quantity", pos)
    return value


def _eval(node: Node, expr: Expression, resolve: Resolver) -> Any:
    kind = node.kind
    if kind == "num":
        return node.value
    if kind == "name":
        return resolve(node.value)
    if kind == "attr":
        return _field(_eval(node.args[0], expr, resolve), node.value, expr, node.pos)
    if kind == "index":
        return _index(_eval(node.args[0], expr, resolve), node.value, expr, node.pos)
    if kind == "call":
        values = [_eval(a, expr, resolve) for a in node.args]
        return _call(node.value, values, expr, node.pos)
    if kind == "neg":
        v = _eval(node.args[0], expr, resolve)
        if _is_record(v):
            raise expr.error("cannot negate objects", node.pos)
        return -v
    if kind == "binop":
        a = _eval(node.args[0], expr, resolve)
        b = _eval(node.args[1], expr, resolve)
        ra, rb = _is_record(a), _is_record(b)
        if (ra or rb) and not (ra and rb and node.value in ("+", "-")):
            raise expr.error(
                f"'{node.value}' between objects and numbers is not defined; "
                "use an attribute such as .pt, or add objects with '+'",
                node.pos,
            )
        if ra and rb:
            try:
                if node.value == "+":
                    return kin.add_p4(a, b)
                qx, qy, qz, qe = kin.components(b)
                return kin.add_p4(a, kin.make_p4(-qx, -qy, -qz, -qe))
            except TypeError as exc:
                raise expr.error(f"cannot add these objects: {exc}", node.pos) from None
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            return _BINOPS[node.value](a, b)
    if kind == "compare":
        values = [_eval(a, expr, resolve) for a in node.args]
        for v, sub in zip(values, node.args, strict=True):
            _bool(v, expr, sub.pos)
        out = None
        for op, left, right in zip(node.value, values[:-1], values[1:], strict=False):
            term = _CMP[op](left, right)
            out = term if out is None else out & term
        return out
    if kind == "not":
        return ~_as_bool(_bool(_eval(node.args[0], expr, resolve), expr, node.pos))
    if kind in ("and", "or"):
        a = _as_bool(_bool(_eval(node.args[0], expr, resolve), expr, node.args[0].pos))
        b = _as_bool(_bool(_eval(node.args[1], expr, resolve), expr, node.args[1].pos))
        return (a & b) if kind == "and" else (a | b)
    raise expr.error(f"unknown node {kind!r}", node.pos)  # pragma: no cover


def _as_bool(value: Any) -> Any:
    if isinstance(value, ak.Array):
        return ak.values_astype(value, bool)
    return np.asarray(value).astype(bool)


def evaluate(expr: Expression | str, resolve: Resolver | dict[str, Any]) -> Any:
    """Evaluate ``expr`` column-wise; ``resolve`` maps a name to its array (or a dict).

    Unknown names raise :class:`ExpressionError` pointing at the name.
    """
    parsed = parse(expr) if isinstance(expr, str) else expr
    if isinstance(resolve, dict):
        table = resolve

        def lookup(name: str) -> Any:
            return table[name]

        resolver: Resolver = lookup
    else:
        resolver = resolve
    names = parsed.names

    def guarded(name: str) -> Any:
        try:
            return resolver(name)
        except KeyError:
            raise parsed.error(f"unknown name {name!r}", names.get(name, 0)) from None

    return _eval(parsed.tree, parsed, guarded)

"""Parsers for reactions (``2 A + B -> P``) and rate laws (``k * [A]^m * [B]``).

Text from a model file is tokenised and parsed here by a small recursive-
descent parser into a tree of plain dataclasses; nothing is ever passed to
``eval``/``exec`` and no Python object is looked up by name. The tree is then
reduced to the one shape kinfit integrates for now: a positive number times
one rate constant times powers of concentrations, where each exponent is a
number or an affine combination of order parameters (``m``, ``m - 1``,
``0.5*n``).

Grammar of a rate law (``^`` and ``**`` are both powers, ``·`` and ``×``
multiply, juxtaposition ``k[A][B]`` multiplies)::

    expr   := term (("+" | "-") term)*
    term   := unary (("*" | "/" | <juxtaposition>) unary)*
    unary  := ("-" | "+") unary | power
    power  := atom (("^" | "**") unary)?
    atom   := NUMBER | NAME | "[" NAME "]" | "(" expr ")"
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Union

__all__ = ["ParseError", "Number", "Name", "Conc", "Unary", "Binary", "parse_expression",
           "Affine", "PowerLaw", "to_power_law", "Reaction", "parse_reaction",
           "SPECIES_NAME", "PARAMETER_NAME", "MAX_LENGTH", "MAX_DEPTH"]

MAX_LENGTH = 2000        # characters in one expression
MAX_DEPTH = 50           # nesting of parentheses and unary signs
MAX_EXPONENT = 20.0      # |order| beyond this is surely a typing error (common practice)

SPECIES_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]*\Z")
PARAMETER_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]*\Z")


class ParseError(ValueError):
    """Text that is not a valid reaction or rate law.

    `column` is 1-based where known. The mechanism loader turns this into a
    :class:`~kinfit.core.errors.KinfitError` naming the file and line.
    """

    def __init__(self, message, column=None):
        super().__init__(message)
        self.column = column

    def __str__(self):
        base = super().__str__()
        return f"{base} (column {self.column})" if self.column else base


# --------------------------------------------------------------------- tokens

_TOKEN = re.compile(r"""
    (?P<ws>\s+)
  | (?P<number>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)
  | (?P<conc>\[\s*[^\[\]]*?\s*\])
  | (?P<name>[A-Za-z_][A-Za-z0-9_]*)
  | (?P<op>\*\*|[*/^+\-()·×−])
""", re.VERBOSE)

_OP_ALIASES = {"·": "*", "×": "*", "−": "-", "**": "^"}


@dataclass(frozen=True)
class _Token:
    kind: str
    text: str
    column: int


def _tokenize(text):
    tokens, pos = [], 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if m is None:
            raise ParseError(f"unexpected character {text[pos]!r}", pos + 1)
        kind = m.lastgroup
        if kind != "ws":
            value = m.group()
            if kind == "op":
                value = _OP_ALIASES.get(value, value)
            tokens.append(_Token(kind, value, pos + 1))
        pos = m.end()
    return tokens


# ----------------------------------------------------------------------- tree

@dataclass(frozen=True)
class Number:
    value: float


@dataclass(frozen=True)
class Name:
    name: str
    column: int = 0


@dataclass(frozen=True)
class Conc:
    species: str
    column: int = 0


@dataclass(frozen=True)
class Unary:
    op: str
    operand: Node


@dataclass(frozen=True)
class Binary:
    op: str
    left: Node
    right: Node


Node = Union[Number, Name, Conc, Unary, Binary]   # a node of the expression tree


class _Parser:
    def __init__(self, text):
        self.tokens = _tokenize(text)
        self.pos = 0
        self.depth = 0

    def peek(self):
        return self.tokens[self.pos] if self.pos < len(self.tokens) else None

    def take(self):
        tok = self.peek()
        self.pos += 1
        return tok

    def enter(self, column):
        self.depth += 1
        if self.depth > MAX_DEPTH:
            raise ParseError(f"expression nested more than {MAX_DEPTH} levels deep", column)

    def parse(self):
        if not self.tokens:
            raise ParseError("the expression is empty")
        node = self.expr()
        tok = self.peek()
        if tok is not None:
            raise ParseError(f"unexpected {tok.text!r}", tok.column)
        return node

    def expr(self):
        node = self.term()
        while (tok := self.peek()) is not None and tok.kind == "op" and tok.text in "+-":
            self.take()
            node = Binary(tok.text, node, self.term())
        return node

    def term(self):
        node = self.unary()
        while (tok := self.peek()) is not None:
            if tok.kind == "op" and tok.text in "*/":
                self.take()
                node = Binary(tok.text, node, self.unary())
            elif tok.kind in ("name", "conc") or (tok.kind == "op" and tok.text == "("):
                node = Binary("*", node, self.unary())  # k[A][B]
            else:
                break
        return node

    def unary(self):
        tok = self.peek()
        if tok is not None and tok.kind == "op" and tok.text in "+-":
            self.take()
            self.enter(tok.column)
            operand = self.unary()
            self.depth -= 1
            return operand if tok.text == "+" else Unary("-", operand)
        return self.power()

    def power(self):
        node = self.atom()
        tok = self.peek()
        if tok is not None and tok.kind == "op" and tok.text == "^":
            self.take()
            self.enter(tok.column)
            exponent = self.unary()
            self.depth -= 1
            node = Binary("^", node, exponent)
        return node

    def atom(self):
        tok = self.take()
        if tok is None:
            raise ParseError("the expression ends too early")
        if tok.kind == "number":
            value = float(tok.text)
            if not math.isfinite(value):
                raise ParseError(f"number {tok.text} is too large", tok.column)
            return Number(value)
        if tok.kind == "name":
            nxt = self.peek()
            if nxt is not None and nxt.text == "(" and nxt.column == tok.column + len(tok.text):
                raise ParseError(f"functions such as {tok.text}(...) are not supported in a "
                                 f"rate law", tok.column)
            return Name(tok.text, tok.column)
        if tok.kind == "conc":
            species = tok.text[1:-1].strip()
            if not SPECIES_NAME.match(species):
                raise ParseError(f"{tok.text} is not a concentration: a species name starts "
                                 f"with a letter and has letters, digits and _", tok.column)
            return Conc(species, tok.column)
        if tok.text == "(":
            self.enter(tok.column)
            node = self.expr()
            self.depth -= 1
            close = self.take()
            if close is None or close.text != ")":
                raise ParseError("a '(' is not closed", tok.column)
            return node
        raise ParseError(f"unexpected {tok.text!r}", tok.column)


def parse_expression(text):
    """Parse a rate-law expression into a tree of dataclasses.

    Raises
    ------
    ParseError
        On any text that is not a valid expression, with the column.
    """
    if not isinstance(text, str):
        raise ParseError(f"expected text, got {type(text).__name__}")
    if len(text) > MAX_LENGTH:
        raise ParseError(f"the expression is {len(text)} characters long; "
                         f"at most {MAX_LENGTH} are allowed")
    return _Parser(text).parse()


# --------------------------------------------------------- power-law reduction

@dataclass(frozen=True)
class Affine:
    """An exponent ``const + Σ coef[p] * p`` over order parameters ``p``."""

    const: float = 0.0
    coef: tuple[tuple[str, float], ...] = ()

    @property
    def is_number(self):
        return not self.coef

    def __add__(self, other):
        merged = dict(self.coef)
        for name, c in other.coef:
            merged[name] = merged.get(name, 0.0) + c
        return Affine(self.const + other.const,
                      tuple(sorted((n, c) for n, c in merged.items() if c != 0.0)))

    def scale(self, factor):
        return Affine(self.const * factor,
                      tuple((n, c * factor) for n, c in self.coef if c * factor != 0.0))

    def value(self, values):
        """Numeric value given parameter `values` (a mapping)."""
        return self.const + sum(c * values[n] for n, c in self.coef)

    def text(self, values=None, digits=3):
        """Readable form: ``m``, ``2``, ``m - 1``; numeric if `values` are given."""
        if values is not None:
            return _fmt_number(self.value(values), digits)
        terms = []
        for name, c in self.coef:
            terms.append(name if c == 1 else f"-{name}" if c == -1 else f"{_fmt_number(c)}*{name}")
        if self.const or not terms:
            terms.append(_fmt_number(self.const))
        return " + ".join(terms).replace("+ -", "- ")


def _fmt_number(x, digits=6):
    return f"{x:.{digits}g}"


@dataclass(frozen=True)
class PowerLaw:
    """A rate law ``factor * constant * Π [species]^order``.

    Attributes
    ----------
    factor : float
        Positive numeric multiplier (1 unless the text has a number).
    constant : str
        Name of the rate-constant parameter.
    orders : tuple of (species, Affine)
        Exponent of each species that appears, in order of appearance.
    """

    factor: float
    constant: str
    orders: tuple[tuple[str, Affine], ...]
    text: str = field(default="", compare=False)

    @property
    def order_parameters(self):
        return tuple(sorted({n for _, a in self.orders for n, _ in a.coef}))

    def overall_order(self, values):
        """Sum of the orders, given parameter `values`."""
        return sum(a.value(values) for _, a in self.orders)


def _affine(node):
    """Reduce an exponent subtree to an Affine, or raise ParseError."""
    if isinstance(node, Number):
        return Affine(node.value)
    if isinstance(node, Name):
        return Affine(0.0, ((node.name, 1.0),))
    if isinstance(node, Unary):
        return _affine(node.operand).scale(-1.0)
    if isinstance(node, Binary):
        left, right = _affine(node.left), _affine(node.right)
        if node.op == "+":
            return left + right
        if node.op == "-":
            return left + right.scale(-1.0)
        if node.op == "*" and (left.is_number or right.is_number):
            return right.scale(left.const) if left.is_number else left.scale(right.const)
        if node.op == "/" and right.is_number and right.const != 0:
            return left.scale(1.0 / right.const)
        if node.op == "^" and left.is_number and right.is_number:
            return Affine(_checked_power(left.const, right.const))
    if isinstance(node, Conc):
        raise ParseError(f"a concentration [{node.species}] cannot be an exponent", node.column)
    raise ParseError("an exponent must be a number or an order parameter "
                     "(like 2, 0.5, m or m - 1)")


def _checked_power(base, exponent):
    try:
        value = base ** exponent
    except (OverflowError, ZeroDivisionError):
        value = math.inf
    if isinstance(value, complex) or not math.isfinite(value):
        raise ParseError(f"{base:g}^{exponent:g} is not a finite real number")
    return value


_EXPECTED = ("expected a rate constant times powers of concentrations, "
             "like 'k * [A]^m * [B]' or 'k * [A]^2'")


def _collect(node):
    """Reduce a rate-law subtree to (factor, {param: power}, {species: Affine})."""
    if isinstance(node, Number):
        return node.value, {}, {}
    if isinstance(node, Name):
        return 1.0, {node.name: Affine(1.0)}, {}
    if isinstance(node, Conc):
        return 1.0, {}, {node.species: Affine(1.0)}
    if isinstance(node, Unary):
        raise ParseError("a rate law must be positive: no minus sign in front of it or "
                         "its factors (for a reverse direction use a reversible step)")
    if isinstance(node, Binary):
        if node.op in "+-":
            raise ParseError(f"sums and differences are not supported in a rate law yet; "
                             f"{_EXPECTED}")
        if node.op in "*/":
            f1, p1, s1 = _collect(node.left)
            f2, p2, s2 = _collect(node.right)
            sign = 1.0 if node.op == "*" else -1.0
            if sign < 0:
                if f2 == 0:
                    raise ParseError("division by zero")
                f2 = 1.0 / f2
            for name, a in p2.items():
                p1[name] = p1.get(name, Affine()) + a.scale(sign)
            for name, a in s2.items():
                s1[name] = s1.get(name, Affine()) + a.scale(sign)
            return f1 * f2, p1, s1
        if node.op == "^":
            exponent = _affine(node.right)
            f, p, s = _collect(node.left)
            if not exponent.is_number and (f != 1.0 or p):
                raise ParseError("only concentrations may be raised to an order parameter; "
                                 + _EXPECTED)
            if exponent.is_number:
                f = _checked_power(f, exponent.const)
                p = {n: a.scale(exponent.const) for n, a in p.items()}
                s = {n: a.scale(exponent.const) for n, a in s.items()}
            else:
                for name, a in s.items():
                    if not a.is_number:
                        raise ParseError("a power of a power of order parameters is not "
                                         "supported; " + _EXPECTED)
                s = {n: exponent.scale(a.const) for n, a in s.items()}
            return f, p, s
    raise ParseError(_EXPECTED)  # pragma: no cover - every node type is handled


def to_power_law(text):
    """Parse `text` and reduce it to a :class:`PowerLaw`.

    Raises
    ------
    ParseError
        If the text does not parse, or is not a positive number times one rate
        constant times powers of concentrations.
    """
    tree = parse_expression(text)
    factor, params, species = _collect(tree)
    constants = [n for n, a in params.items() if not (a.is_number and a.const == 0)]
    if len(constants) != 1:
        found = ", ".join(constants) if constants else "none"
        raise ParseError(f"a rate law needs exactly one rate constant (found: {found}); "
                         + _EXPECTED)
    power = params[constants[0]]
    if not (power.is_number and power.const == 1.0):
        raise ParseError(f"the rate constant {constants[0]} must appear to the first power; "
                         + _EXPECTED)
    if not (math.isfinite(factor) and factor > 0):
        raise ParseError(f"the numeric factor {factor:g} must be a positive finite number")
    for name, a in species.items():
        if a.is_number and abs(a.const) > MAX_EXPONENT:
            raise ParseError(f"order {a.const:g} in [{name}] is beyond ±{MAX_EXPONENT:g}; "
                             f"is it a typing error?")
    orders = tuple((n, a) for n, a in species.items() if a.coef or a.const != 0.0)
    return PowerLaw(factor, constants[0], orders, text)


# ------------------------------------------------------------------ reactions

_ARROWS = (("<=>", True), ("<->", True), ("⇌", True), ("->", False), ("→", False))
_TERM = re.compile(r"\s*(?P<coef>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)?\s*(?P<name>\S.*?)\s*\Z")


@dataclass(frozen=True)
class Reaction:
    """A parsed reaction.

    Attributes
    ----------
    reactants, products : tuple of (species, coefficient)
        Stoichiometric coefficients as written (repeated species summed).
    reversible : bool
        True for ``<=>``.
    """

    reactants: tuple[tuple[str, float], ...]
    products: tuple[tuple[str, float], ...]
    reversible: bool
    text: str = field(default="", compare=False)

    @property
    def species(self):
        seen = []
        for name, _ in self.reactants + self.products:
            if name not in seen:
                seen.append(name)
        return tuple(seen)

    def net(self):
        """Net stoichiometric number of each species (products minus reactants)."""
        out = {}
        for name, c in self.reactants:
            out[name] = out.get(name, 0.0) - c
        for name, c in self.products:
            out[name] = out.get(name, 0.0) + c
        return out


def _side(text, which):
    if not text.strip():
        raise ParseError(f"nothing on the {which} side of the reaction; write every "
                         f"reactant and product, like 'A + B -> P'")
    terms = {}
    for part in text.split("+"):
        m = _TERM.match(part)
        if not part.strip() or m is None:
            raise ParseError(f"an empty term on the {which} side (two '+' in a row, or a "
                             f"'+' at an end)")
        coef = float(m.group("coef")) if m.group("coef") else 1.0
        name = m.group("name")
        if not SPECIES_NAME.match(name):
            raise ParseError(f"{name!r} on the {which} side is not a species name: a name "
                             f"starts with a letter and has letters, digits and _ "
                             f"(a coefficient goes in front: '2 A')")
        if not (math.isfinite(coef) and coef > 0):
            raise ParseError(f"the coefficient of {name} must be a positive number")
        terms[name] = terms.get(name, 0.0) + coef
    return tuple(terms.items())


def parse_reaction(text):
    """Parse a reaction such as ``2 A + B -> P`` or ``A + B <=> I``.

    Raises
    ------
    ParseError
        With a plain description of what was expected.
    """
    if not isinstance(text, str):
        raise ParseError(f"expected text like 'A + B -> P', got {type(text).__name__}")
    if len(text) > MAX_LENGTH:
        raise ParseError(f"the reaction is {len(text)} characters long; at most "
                         f"{MAX_LENGTH} are allowed")
    found = [(a, rev) for a, rev in _ARROWS if a in text]
    # '<->' contains '->': the two-way arrows are listed first and win.
    if not found:
        raise ParseError("no arrow: write '->' for a one-way step or '<=>' for a "
                         "reversible one, like 'A + B -> P'")
    arrow, reversible = found[0]
    left, _, right = text.partition(arrow)
    if any(a in left or a in right for a, _ in _ARROWS):
        raise ParseError("a step has exactly one arrow; write each step separately")
    return Reaction(_side(left, "left"), _side(right, "right"), reversible, text)

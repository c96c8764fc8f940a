"""A safe formula language for lifetime models: text -> checked tree -> vectorised numpy, and d/dt.
Syntax and precedence follow Python expressions (Language Reference §6.17); d/dt rules cite NIST DLMF.

User text is only ever handed to ``ast.parse(..., mode="eval")`` to obtain a syntax
tree; every node is then rebuilt as one of the small node classes below, or rejected.
Nothing the user typed is evaluated as Python.
"""
from __future__ import annotations

import ast
import functools
import keyword
import math
import operator
import re
import unicodedata
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import special

from .errors import ModelError

MAX_LENGTH = 2000
MAX_DEPTH = 100
# Flat sums or products longer than this are read as a balanced tree (see _Reader.chain).
CHAIN_MIN = 16
# Largest expression, counted as a tree (shared parts counted each time they occur): bounds
# the work of compiling, printing and differentiating; an exact derivative may grow far
# beyond its formula (95 nested sinh: megabytes).
MAX_NODES = 20_000


# --- The tree ----------------------------------------------------------------------------

@dataclass(frozen=True)
class Num:
    value: float


@dataclass(frozen=True)
class Name:
    id: str                       # "t", a declared parameter, "pi" or "e"


@dataclass(frozen=True)
class Neg:
    arg: object


@dataclass(frozen=True)
class Bin:
    op: str                       # + - * / **
    left: object
    right: object


@dataclass(frozen=True)
class Call:
    fn: str
    args: tuple


@dataclass(frozen=True)
class When:
    cond: object
    then: object
    other: object


@dataclass(frozen=True)
class Compare:                    # a chain: operands[0] ops[0] operands[1] ops[1] ...
    ops: tuple
    operands: tuple


@dataclass(frozen=True)
class Logic:
    op: str                       # "and", "or" (two or more args), "not" (one arg)
    args: tuple


def _children(node) -> tuple:
    if isinstance(node, Neg):
        return (node.arg,)
    if isinstance(node, Bin):
        return (node.left, node.right)
    if isinstance(node, (Call, Logic)):
        return node.args
    if isinstance(node, When):
        return (node.cond, node.then, node.other)
    if isinstance(node, Compare):
        return node.operands
    return ()


def tree_size(node, limit: int = 10 * 20_000) -> int:
    """Number of nodes counted as a tree (a shared subtree once per occurrence), computed
    on the shared graph without recursion; stops early past ``limit``."""
    sizes: dict[int, int] = {}
    stack = [(node, False)]
    while stack:
        item, expanded = stack.pop()
        key = id(item)
        if key in sizes:
            continue
        kids = _children(item)
        if expanded or not kids:
            sizes[key] = min(1 + sum(sizes[id(k)] for k in kids), limit + 1)
            continue
        stack.append((item, True))
        stack.extend((k, False) for k in kids if id(k) not in sizes)
    return sizes[id(node)]


def _walk(node):
    stack = [node]
    while stack:
        node = stack.pop()
        yield node
        stack.extend(_children(node))


# --- Simplifying constructors (used by derivative()) --------------------------------------

ZERO, ONE, TWO = Num(0.0), Num(1.0), Num(2.0)
_ARITH = {"+": operator.add, "-": operator.sub, "*": operator.mul, "/": operator.truediv,
          "**": operator.pow}


def _is(node, value) -> bool:
    return isinstance(node, Num) and node.value == value


def _bin(op, a, b):
    if isinstance(a, Num) and isinstance(b, Num):
        try:
            v = _ARITH[op](a.value, b.value)
        except ArithmeticError:
            v = None
        # Python's pow can return complex where numpy gives NaN: only fold real, finite results.
        if isinstance(v, float) and math.isfinite(v):
            return Num(v)
    return Bin(op, a, b)


def neg(a):
    if isinstance(a, Num):
        return Num(-a.value)
    return a.arg if isinstance(a, Neg) else Neg(a)


def add(a, b):
    return b if _is(a, 0) else a if _is(b, 0) else _bin("+", a, b)


def sub(a, b):
    # (x - c) - d -> x - (c + d): keeps the power rule's exponent readable, beta - 2.
    if isinstance(b, Num) and isinstance(a, Bin) and a.op == "-" and isinstance(a.right, Num):
        return sub(a.left, Num(a.right.value + b.value))
    return a if _is(b, 0) else neg(b) if _is(a, 0) else _bin("-", a, b)


def mul(a, b):
    if _is(a, 0) or _is(b, 0):
        return ZERO
    if _is(a, -1) or _is(b, -1):
        return neg(b if _is(a, -1) else a)
    return b if _is(a, 1) else a if _is(b, 1) else _bin("*", a, b)


def div(a, b):
    return ZERO if _is(a, 0) else a if _is(b, 1) else _bin("/", a, b)


def power(a, b):
    return ONE if _is(b, 0) else a if _is(b, 1) else _bin("**", a, b)


def call(fn, *args):
    return Call(fn, args)


def _sign(u):
    # sign(u) written with when() so that every derivative prints as parseable text.
    return When(Compare((">",), (u, ZERO)), ONE,
                When(Compare(("<",), (u, ZERO)), Num(-1.0), ZERO))


# --- Functions: name -> (arity, numpy implementation, f'(u) for one-argument functions) ---

@dataclass(frozen=True)
class _Fn:
    arity: int                    # exact number of arguments; -2 means "two or more"
    impl: Callable | None
    slope: Callable | None = None


_INV_SQRT_PI_2 = lambda: div(TWO, call("sqrt", Name("pi")))  # noqa: E731  2/sqrt(pi)

FUNCTIONS = {
    "exp": _Fn(1, np.exp, lambda u: call("exp", u)),
    "log": _Fn(1, np.log, lambda u: div(ONE, u)),
    "log1p": _Fn(1, np.log1p, lambda u: div(ONE, add(ONE, u))),
    "expm1": _Fn(1, np.expm1, lambda u: call("exp", u)),
    "sqrt": _Fn(1, np.sqrt, lambda u: div(ONE, mul(TWO, call("sqrt", u)))),
    "sin": _Fn(1, np.sin, lambda u: call("cos", u)),
    "cos": _Fn(1, np.cos, lambda u: neg(call("sin", u))),
    "tan": _Fn(1, np.tan, lambda u: div(ONE, power(call("cos", u), TWO))),
    "asin": _Fn(1, np.arcsin, lambda u: div(ONE, call("sqrt", sub(ONE, power(u, TWO))))),
    "acos": _Fn(1, np.arccos, lambda u: neg(div(ONE, call("sqrt", sub(ONE, power(u, TWO)))))),
    "atan": _Fn(1, np.arctan, lambda u: div(ONE, add(ONE, power(u, TWO)))),
    "sinh": _Fn(1, np.sinh, lambda u: call("cosh", u)),
    "cosh": _Fn(1, np.cosh, lambda u: call("sinh", u)),
    "tanh": _Fn(1, np.tanh, lambda u: div(ONE, power(call("cosh", u), TWO))),
    # d erf(u)/du = 2/sqrt(pi) exp(-u^2): DLMF 7.2.1; erfc = 1 - erf (DLMF 7.2.2).
    "erf": _Fn(1, special.erf, lambda u: mul(_INV_SQRT_PI_2(), call("exp", neg(power(u, TWO))))),
    "erfc": _Fn(1, special.erfc,
                lambda u: neg(mul(_INV_SQRT_PI_2(), call("exp", neg(power(u, TWO)))))),
    # psi = Gamma'/Gamma = (ln Gamma)' (DLMF 5.2.2); psi^(n) = d^n psi/du^n (DLMF 5.15.1).
    "gamma": _Fn(1, special.gamma, lambda u: mul(call("gamma", u), call("digamma", u))),
    "lgamma": _Fn(1, special.gammaln, lambda u: call("digamma", u)),
    "digamma": _Fn(1, special.digamma, lambda u: call("polygamma", ONE, u)),
    "polygamma": _Fn(2, special.polygamma),
    "abs": _Fn(1, np.abs, _sign),
    "min": _Fn(-2, np.minimum),
    "max": _Fn(-2, np.maximum),
    "when": _Fn(3, None),
}
_CONSTANTS = {"pi": math.pi, "e": math.e}
RESERVED = frozenset({"t", *_CONSTANTS, *FUNCTIONS})


# --- Reading: Python syntax tree -> our tree, whitelisting every node ----------------------

# "^" never reaches here: _Reader rewrites it to "**" first, so it gets power's precedence.
_BIN_OPS = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}
_CMP_OPS = {ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">=", ast.Eq: "==",
            ast.NotEq: "!="}
_PYTHON_OPS = {ast.Mod: "%", ast.FloorDiv: "//", ast.MatMult: "@", ast.LShift: "<<",
               ast.RShift: ">>", ast.BitAnd: "&", ast.BitOr: "|", ast.Invert: "~",
               ast.In: "in", ast.NotIn: "not in", ast.Is: "is", ast.IsNot: "is not"}
_FORBIDDEN = {
    ast.Attribute: "attribute access", ast.Subscript: "indexing with [...]",
    ast.Lambda: "lambda expressions", ast.ListComp: "comprehensions",
    ast.SetComp: "comprehensions", ast.DictComp: "comprehensions",
    ast.GeneratorExp: "comprehensions", ast.List: "lists", ast.Tuple: "tuples",
    ast.Set: "sets", ast.Dict: "dicts", ast.JoinedStr: "f-strings",
    ast.NamedExpr: "assignments (:=)", ast.Starred: "starred arguments",
    ast.Await: "await", ast.Slice: "slices",
}
_LINE_BREAK = re.compile(r"\r\n|\r|\n")


class _Reader:
    def __init__(self, text: str, params: tuple, field: str):
        self.text, self.params, self.field = text, params, field
        self.body = text.lstrip()          # Python rejects leading blanks as an indent
        self.lead = len(text) - len(self.body)
        self.src = self.body.replace("^", "**")

    def read(self):
        try:
            tree = ast.parse(self.src, mode="eval")
        except SyntaxError as exc:
            if "too many nested parentheses" in str(exc.msg):
                self.too_deep()
            self.fail_at(exc.lineno, (exc.offset or 0) - 1, f"syntax error: {exc.msg}",
                         char_col=True)
        except (RecursionError, MemoryError):
            self.too_deep()
        except ValueError as exc:                      # e.g. NUL characters
            raise ModelError(self.field, f"syntax error: {exc}") from None
        return self.value(tree.body, 0)

    def too_deep(self):
        raise ModelError(self.field, f"formula nests more than {MAX_DEPTH} levels deep; "
                                     "simplify it or split it into parts")

    def fail_at(self, lineno, col, reason, char_col=False):
        """Raise with a caret under the offending character of the original text."""
        src_starts = [0] + [m.end() for m in _LINE_BREAK.finditer(self.src)]
        if lineno is None or col < 0 or lineno > len(src_starts):
            pos = len(self.src)
        else:
            line_start = src_starts[lineno - 1]
            if not char_col:                           # ast column offsets count UTF-8 bytes
                line = self.src[line_start:].encode()
                col = len(line[:col].decode(errors="ignore"))
            pos = line_start + col
        body_pos, src_pos = 0, 0                       # undo the "^" -> "**" rewriting
        while body_pos < len(self.body) and src_pos < pos:
            src_pos += 2 if self.body[body_pos] == "^" else 1
            body_pos += 1
        pos = self.lead + body_pos
        starts = [0] + [m.end() for m in _LINE_BREAK.finditer(self.text)]
        line_no = max(i for i, s in enumerate(starts) if s <= pos)
        line = _LINE_BREAK.split(self.text)[line_no]
        col = min(pos - starts[line_no], len(line))
        where = f"column {col + 1}" if len(starts) == 1 else f"line {line_no + 1}, column {col + 1}"
        raise ModelError(self.field, f"{reason} (at {where})\n  {line}\n  {' ' * col}^")

    def fail(self, node, reason):
        self.fail_at(node.lineno, node.col_offset, reason)

    def segment(self, node) -> str:
        return ast.get_source_segment(self.src, node) or type(node).__name__

    def known(self) -> str:
        names = ", ".join(["t", *_CONSTANTS, *self.params])
        return f"known: {names}; functions: {', '.join(f for f in FUNCTIONS)}"

    def value(self, node, depth):
        """A numeric expression."""
        if depth > MAX_DEPTH:
            self.too_deep()
        depth += 1
        if isinstance(node, ast.Constant):
            v = node.value
            if isinstance(v, (str, bytes)):
                self.fail(node, f"text (strings) not allowed in a formula: {self.segment(node)}")
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                self.fail(node, f"only real numbers are allowed, not {self.segment(node)}")
            try:
                return Num(float(v))
            except OverflowError:
                self.fail(node, "number is too large")
        if isinstance(node, ast.Name):
            if node.id == "t" or node.id in _CONSTANTS or node.id in self.params:
                return Name(node.id)
            if node.id in FUNCTIONS:
                self.fail(node, f"'{node.id}' is a function; call it like {node.id}(t)")
            self.fail(node, f"unknown name '{node.id}' ({self.known()})")
        if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
            arg = self.value(node.operand, depth)
            return Neg(arg) if isinstance(node.op, ast.USub) else arg
        if isinstance(node, ast.BinOp) and type(node.op) in _BIN_OPS:
            chain = self.chain(node, depth)
            if chain is not None:
                return chain
            return Bin(_BIN_OPS[type(node.op)], self.value(node.left, depth),
                       self.value(node.right, depth))
        if isinstance(node, ast.Call):
            return self.call(node, depth)
        if isinstance(node, ast.IfExp):
            return When(self.condition(node.test, depth), self.value(node.body, depth),
                        self.value(node.orelse, depth))
        if isinstance(node, (ast.Compare, ast.BoolOp)) or (
                isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.Not)):
            self.fail(node, f"'{self.segment(node)}' is a condition; conditions are only "
                            "allowed as the first argument of when(...) or after 'if'")
        self.reject(node)

    def chain(self, node, depth):
        """A long flat sum (a + b - c + ...) or product (a * b * c ...) as a balanced tree.

        Python parses ``a + b + c`` as ((a + b) + c): a flat sum of 101 terms would be 100
        levels deep and be refused as deeply nested. A run of more than CHAIN_MIN terms is
        read as the terms, each at the depth of the whole, and summed (or multiplied) in a
        balanced tree, so depth counts real nesting only.
        """
        additive = (ast.Add, ast.Sub)
        kinds = additive if isinstance(node.op, additive) else (ast.Mult,) if isinstance(node.op, ast.Mult) else None
        if kinds is None:
            return None
        terms = []                        # (negated, ast node), right to left
        current = node
        while isinstance(current, ast.BinOp) and isinstance(current.op, kinds):
            terms.append((isinstance(current.op, ast.Sub), current.right))
            current = current.left
        if len(terms) + 1 <= CHAIN_MIN:
            return None
        terms.append((False, current))
        values = []
        for negated, term in reversed(terms):
            v = self.value(term, depth)
            values.append(Neg(v) if negated else v)
        op = "+" if kinds is additive else "*"
        while len(values) > 1:
            paired = [Bin(op, values[i], values[i + 1]) for i in range(0, len(values) - 1, 2)]
            values = paired + ([values[-1]] if len(values) % 2 else [])
        return values[0]

    def condition(self, node, depth):
        """A comparison, or and/or/not of comparisons: true/false per element."""
        if depth > MAX_DEPTH:
            self.too_deep()
        depth += 1
        if isinstance(node, ast.Compare):
            for op in node.ops:
                if type(op) not in _CMP_OPS:
                    self.reject_op(node, op)
            operands = (node.left, *node.comparators)
            return Compare(tuple(_CMP_OPS[type(op)] for op in node.ops),
                           tuple(self.value(x, depth) for x in operands))
        if isinstance(node, ast.BoolOp):
            op = "and" if isinstance(node.op, ast.And) else "or"
            return Logic(op, tuple(self.condition(x, depth) for x in node.values))
        if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.Not):
            return Logic("not", (self.condition(node.operand, depth),))
        self.fail(node, f"a condition must be a comparison such as t < 5 (combined with "
                        f"and/or/not if needed), not '{self.segment(node)}'")

    def call(self, node, depth):
        if not isinstance(node.func, ast.Name):
            self.fail(node, f"only the named functions can be called, not "
                            f"'{self.segment(node.func)}' ({self.known()})")
        fn = node.func.id
        if fn not in FUNCTIONS:
            what = f"'{fn}' is not a function" if fn in RESERVED or fn in self.params \
                else f"unknown function '{fn}'"
            self.fail(node, f"{what} (functions: {', '.join(FUNCTIONS)})")
        if node.keywords:
            self.fail(node, f"{fn}() takes no keyword arguments")
        for arg in node.args:
            if isinstance(arg, ast.Starred):
                self.fail(arg, f"starred arguments are not allowed in {fn}()")
        arity, got = FUNCTIONS[fn].arity, len(node.args)
        if arity == -2 and got < 2:
            self.fail(node, f"{fn}() takes at least 2 arguments, got {got}")
        if arity > 0 and got != arity:
            usage = {"when": " (condition, then, otherwise)",
                     "polygamma": " (n, x)"}.get(fn, "")
            self.fail(node, f"{fn}() takes {arity} argument{'s' * (arity > 1)}{usage}, "
                            f"got {got}")
        if fn == "when":
            return When(self.condition(node.args[0], depth),
                        self.value(node.args[1], depth), self.value(node.args[2], depth))
        if fn == "polygamma":
            n = node.args[0]
            if not (isinstance(n, ast.Constant) and isinstance(n.value, (int, float))
                    and not isinstance(n.value, bool) and float(n.value).is_integer()
                    and 0 <= n.value <= 100):
                self.fail(n, "polygamma(n, x): n must be a whole number 0..100 written as a "
                             "number")
            return Call(fn, (Num(float(n.value)), self.value(node.args[1], depth)))
        return Call(fn, tuple(self.value(a, depth) for a in node.args))

    def reject_op(self, node, op):
        self.fail(node, f"operator '{_PYTHON_OPS.get(type(op), type(op).__name__)}' is not "
                        "supported (operators: + - * / ** ^ < <= > >= == != and or not)")

    def reject(self, node):
        if isinstance(node, (ast.BinOp, ast.UnaryOp)):
            self.reject_op(node, node.op)
        what = _FORBIDDEN.get(type(node), f"'{type(node).__name__}' syntax")
        self.fail(node, f"{what} not allowed in a formula: '{self.segment(node)}'")


def _check_params(params, field) -> tuple:
    if params is None:
        return ()
    if isinstance(params, str):
        raise ModelError(field, f"parameter names must be a list of names, not the text "
                                f"{params!r}")
    names = []
    for p in params:
        if not isinstance(p, str) or not p.isidentifier() or keyword.iskeyword(p):
            raise ModelError(field, f"parameter name {p!r} is not a valid name (letters, "
                                    "digits and _, not starting with a digit)")
        p = unicodedata.normalize("NFKC", p)     # Python normalises identifiers this way
        if p in RESERVED:
            raise ModelError(field, f"parameter name {p!r} is reserved (t, pi, e and the "
                                    "function names)")
        if p in names:
            raise ModelError(field, f"parameter name {p!r} is declared twice")
        names.append(p)
    return tuple(names)


# --- Compiling: our tree -> nested closures over numpy ufuncs ------------------------------

_UFUNCS = {"+": np.add, "-": np.subtract, "*": np.multiply, "/": np.true_divide,
           "**": np.power, "<": np.less, "<=": np.less_equal, ">": np.greater,
           ">=": np.greater_equal, "==": np.equal, "!=": np.not_equal,
           "and": np.logical_and, "or": np.logical_or}


def _compile(node) -> Callable[[dict], np.ndarray]:
    if isinstance(node, Num):
        v = node.value
        return lambda env: v
    if isinstance(node, Name):
        if node.id in _CONSTANTS:
            c = _CONSTANTS[node.id]
            return lambda env: c
        key = node.id
        return lambda env: env[key]
    if isinstance(node, Neg):
        a = _compile(node.arg)
        return lambda env: np.negative(a(env))
    if isinstance(node, Bin):
        f, a, b = _UFUNCS[node.op], _compile(node.left), _compile(node.right)
        return lambda env: f(a(env), b(env))
    if isinstance(node, When):
        c, a, b = _compile(node.cond), _compile(node.then), _compile(node.other)
        return lambda env: np.where(c(env), a(env), b(env))
    if isinstance(node, Call) and node.fn == "polygamma":
        n, u = int(node.args[0].value), _compile(node.args[1])
        return lambda env: special.polygamma(n, u(env))
    if isinstance(node, Call) and len(node.args) == 1:
        f, a = FUNCTIONS[node.fn].impl, _compile(node.args[0])
        return lambda env: f(a(env))
    if isinstance(node, Logic) and node.op == "not":
        a = _compile(node.args[0])
        return lambda env: np.logical_not(a(env))
    if isinstance(node, (Call, Logic)):                # min, max, and, or: fold left
        f = FUNCTIONS[node.fn].impl if isinstance(node, Call) else _UFUNCS[node.op]
        parts = [_compile(x) for x in node.args]
        return lambda env: functools.reduce(f, [p(env) for p in parts])
    if isinstance(node, Compare):
        ops = [_UFUNCS[op] for op in node.ops]
        parts = [_compile(x) for x in node.operands]

        def chain(env):
            vals = [p(env) for p in parts]
            return functools.reduce(np.logical_and,
                                    [op(x, y) for op, x, y in zip(ops, vals, vals[1:])])
        return chain
    raise TypeError(f"not a formula node: {node!r}")


# --- Printing: minimal parentheses, Python precedence (Language Reference §6.17) -----------

_PREC = {"or": 1, "and": 2, "not": 3, "cmp": 4, "+": 5, "-": 5, "*": 6, "/": 6,
         "neg": 7, "**": 8, "atom": 9}


def _num_text(v: float) -> str:
    if math.isinf(v):
        return "1e999" if v > 0 else "-1e999"
    text = repr(v)
    return text[:-2] if text.endswith(".0") else text


def _prec(node) -> int:
    if isinstance(node, Num):
        return _PREC["neg"] if _num_text(node.value).startswith("-") else _PREC["atom"]
    if isinstance(node, Neg):
        return _PREC["neg"]
    if isinstance(node, (Bin, Logic)):
        return _PREC[node.op]
    return _PREC["cmp"] if isinstance(node, Compare) else _PREC["atom"]


def _pretty(node) -> str:
    def wrap(child, need):
        text = _pretty(child)
        return f"({text})" if _prec(child) < need else text

    if isinstance(node, Num):
        return _num_text(node.value)
    if isinstance(node, Name):
        return node.id
    if isinstance(node, Neg):
        return "-" + wrap(node.arg, _PREC["neg"])
    if isinstance(node, Bin) and node.op == "**":       # right-associative; -x binds looser
        return wrap(node.left, _PREC["atom"]) + "**" + wrap(node.right, _PREC["neg"])
    if isinstance(node, Bin):
        p, sep = _PREC[node.op], f" {node.op} " if node.op in ("+", "-") else node.op
        # Right operand needs parentheses at equal precedence: a - (b - c), a/(b*c),
        # and also a + (b + c), since float addition is not associative.
        return wrap(node.left, p) + sep + wrap(node.right, p + 1)
    if isinstance(node, Call):
        return f"{node.fn}({', '.join(_pretty(a) for a in node.args)})"
    if isinstance(node, When):
        return f"when({_pretty(node.cond)}, {_pretty(node.then)}, {_pretty(node.other)})"
    if isinstance(node, Compare):
        parts = [wrap(node.operands[0], _PREC["+"])]
        for op, x in zip(node.ops, node.operands[1:]):
            parts += [op, wrap(x, _PREC["+"])]
        return " ".join(parts)
    if node.op == "not":
        return "not " + wrap(node.args[0], _PREC["not"])
    return f" {node.op} ".join(wrap(a, _PREC[node.op] + 1) for a in node.args)


# --- Differentiating: d/dt by the sum, product, quotient, power and chain rules ------------

def _uses_t(node) -> bool:
    return any(isinstance(n, Name) and n.id == "t" for n in _walk(node))


def _derive(node):
    if isinstance(node, Num):
        return ZERO
    if isinstance(node, Name):
        return ONE if node.id == "t" else ZERO
    if isinstance(node, Neg):
        return neg(_derive(node.arg))
    if isinstance(node, When):
        a, b = _derive(node.then), _derive(node.other)
        return a if a == b else When(node.cond, a, b)
    if isinstance(node, Bin):
        u, v = node.left, node.right
        du, dv = _derive(u), _derive(v)
        if node.op in ("+", "-"):
            return add(du, dv) if node.op == "+" else sub(du, dv)
        if node.op == "*":
            return add(mul(du, v), mul(u, dv))
        if node.op == "/":
            return sub(div(du, v), div(mul(u, dv), power(v, TWO)))
        if not _uses_t(v):                             # (u^n)' = n u^(n-1) u'
            return mul(mul(v, power(u, sub(v, ONE))), du)
        # (u^v)' = u^v (v' ln u + v u'/u)
        return mul(node, add(mul(dv, call("log", u)), div(mul(v, du), u)))
    if node.fn in ("min", "max"):
        # The derivative of the selected argument; on ties the first one, as for min/max.
        first, rest = node.args[0], node.args[1:]
        others = rest[0] if len(rest) == 1 else Call(node.fn, rest)
        pick = Compare(("<=" if node.fn == "min" else ">=",), (first, others))
        da, db = _derive(first), _derive(others)
        return da if da == db else When(pick, da, db)
    if node.fn == "polygamma":                         # DLMF 5.15.1
        n, u = node.args
        return mul(call("polygamma", Num(n.value + 1), u), _derive(u))
    (u,) = node.args
    du = _derive(u)
    return ZERO if _is(du, 0) else mul(FUNCTIONS[node.fn].slope(u), du)


# --- The public face ------------------------------------------------------------------------

#: How many parsed formulas ``Formula.parse`` keeps (each a few kilobytes of tree and closures).
PARSED_KEPT = 256


@functools.lru_cache(maxsize=PARSED_KEPT)
def _parsed(cls, text: str, params: tuple, field: str):
    # Formulas are immutable once built (tree, closures, text), so one object can serve every
    # model written with the same text; errors are raised, never kept.
    return cls._parse_new(text, params, field)


def forget_parsed() -> None:
    """Empty the store of parsed formulas: the next model of every text starts cold (for timings)."""
    _parsed.cache_clear()


class Formula:
    """A function of age ``t`` typed by a user, checked, compiled to vectorised numpy.

    Language: numbers (``1e-3``), ``t``, declared parameter names, ``pi``, ``e``;
    ``+ - * /``, unary ``-``/``+``, ``**`` for power, also written ``^`` (read as
    ``**``, with power's precedence and right-associativity: ``2*t^2+1`` is
    ``2*t**2 + 1``, ``2^3^2`` is ``2**9``); parentheses; the functions in
    ``FUNCTIONS`` (min/max take two or more arguments, elementwise; polygamma(n, x)
    needs a whole number n); and the conditional ``when(condition, then, otherwise)``, also written
    ``then if condition else otherwise``, which picks per element. A condition is a comparison
    (``< <= > >= == !=``, chains such as ``0 < t < 5``) combined with and/or/not.

    Build one with ``Formula.parse``; every error is a ``ModelError`` naming ``field``.
    Evaluation returns NaN/inf as values without warnings: callers validate them.
    """

    def __init__(self, tree, params=(), field: str = "formula", text: str | None = None):
        self._tree = tree
        self.params = tuple(params)
        self.field = field
        self.text = _pretty(tree) if text is None else text
        self._fn = _compile(tree)
        self._derivative: Formula | None = None
        self._names: frozenset[str] | None = None

    @classmethod
    def parse(cls, text: str, params=(), field: str = "formula") -> "Formula":
        """The checked, compiled formula. A formula depends only on its text, its parameter names
        and its field, never on parameter values, so the last PARSED_KEPT of them are kept: a
        slider that moves a parameter rebuilds the model with the same Formula object."""
        if not isinstance(text, str):
            raise ModelError(field, f"must be text, got {type(text).__name__}")
        return _parsed(cls, text, _check_params(params, field), field)

    @classmethod
    def _parse_new(cls, text: str, params: tuple, field: str) -> "Formula":
        if not text.strip():
            raise ModelError(field, "formula is empty")
        if len(text) > MAX_LENGTH:
            raise ModelError(field, f"formula is {len(text)} characters long; the limit "
                                    f"is {MAX_LENGTH}")
        tree = _Reader(text, params, field).read()
        size = tree_size(tree)
        if size > MAX_NODES:
            raise ModelError(field, f"formula has {size:,} terms; the limit is {MAX_NODES:,}")
        return cls(tree, params, field, text)

    def __call__(self, t, **param_values) -> np.ndarray:
        return self._run(t, self._values(param_values))

    def bind(self, **param_values) -> Callable[[np.ndarray], np.ndarray]:
        """``f.bind(beta=2)(t)`` equals ``f(t, beta=2)``; values are checked once, here."""
        env = self._values(param_values)
        return lambda t: self._run(t, dict(env))

    def derivative(self) -> "Formula":
        """d/dt as a new Formula (exact, by rule; only trivial simplification), made once per formula."""
        if self._derivative is None:
            try:
                tree = _derive(self._tree)
            except RecursionError:
                tree = None
            size = tree_size(tree) if tree is not None else MAX_NODES + 1
            if size > MAX_NODES:
                raise ModelError(self.field, f"the exact derivative of this formula grows to more than "
                                             f"{MAX_NODES:,} terms (deeply nested functions); simplify the "
                                             "formula, or use a method that needs no derivative (inversion)")
            self._derivative = Formula(tree, self.params, self.field)
        return self._derivative

    def uses_t(self) -> bool:
        return _uses_t(self._tree)

    def names(self) -> set[str]:
        """The declared parameters that the formula actually uses (read off the tree once)."""
        if self._names is None:
            self._names = frozenset(n.id for n in _walk(self._tree) if isinstance(n, Name) and n.id in self.params)
        return set(self._names)

    def pretty(self) -> str:
        return _pretty(self._tree)

    def __repr__(self) -> str:
        return f"Formula({self.text!r}, params={self.params!r})"

    def _values(self, given: dict) -> dict:
        missing = [p for p in self.params if p not in given]
        if missing:
            raise ModelError(self.field, "missing value for parameter "
                             + ", ".join(repr(p) for p in missing))
        extra = [k for k in given if k not in self.params]
        if extra:
            declared = ", ".join(self.params) or "none"
            raise ModelError(self.field, f"unexpected parameter {', '.join(map(repr, extra))} "
                                         f"(declared: {declared})")
        env = {}
        for name, v in given.items():
            try:
                env[name] = np.asarray(v, dtype=float)
            except (TypeError, ValueError):
                raise ModelError(self.field, f"parameter {name!r} must be a number, "
                                             f"got {v!r}") from None
        return env

    def _run(self, t, env: dict) -> np.ndarray:
        try:
            env["t"] = t = np.asarray(t, dtype=float)
        except (TypeError, ValueError):
            raise ModelError("t", f"must be numbers, got {t!r}") from None
        try:
            with np.errstate(all="ignore"):
                out = np.asarray(self._fn(env), dtype=float)
            shape = t.shape if out.shape == t.shape else np.broadcast_shapes(out.shape, t.shape)
        except ValueError as exc:                      # array parameters that do not fit t
            raise ModelError(self.field, f"cannot evaluate for these shapes: {exc}") from None
        # A bare `t` or parameter would hand back the caller's own array: copy instead.
        if out.shape != shape or any(out is v for v in env.values()):
            out = np.array(np.broadcast_to(out, shape), dtype=float)
        return out

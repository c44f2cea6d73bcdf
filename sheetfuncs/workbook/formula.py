"""Formula text -> a small tree of NamedTuples, over openpyxl's tokenizer.

``tokenize`` wraps the tokenizer (a space between two ranges becomes Excel's
intersection operator); ``parse_formula`` / ``parse_tokens`` build the tree with
Excel's precedence.  References in the tree are ``refs.Ref`` / ``refs.Name``.
Nothing here evaluates.  Errors are ``WorkbookError`` without file or cell.
"""
from __future__ import annotations

from typing import Any, Callable, NamedTuple, Union

from openpyxl.formula.tokenizer import Token, Tokenizer

from sheetfuncs.errors import WorkbookError
from sheetfuncs.workbook.refs import Name, Ref, _short, parse_reference

MAX_TREE_DEPTH = 400                    # operators and calls inside one another


# --------------------------------------------------------------------------
# formula trees
# --------------------------------------------------------------------------

class Num(NamedTuple):
    value: float


class Text(NamedTuple):
    value: str


class Bool(NamedTuple):
    value: bool


class Missing(NamedTuple):
    """An argument left out, as in ``F(1,,3)``."""


class ErrorLit(NamedTuple):
    code: str


class Neg(NamedTuple):
    operand: Any


class Percent(NamedTuple):
    operand: Any


class BinOp(NamedTuple):
    op: str
    left: Any
    right: Any


class Call(NamedTuple):
    name: str          # canonical: upper case, without _xlfn./_xludf. prefixes
    ours: bool
    args: tuple[Any, ...]


class ArrayLit(NamedTuple):
    rows: tuple[tuple[Any, ...], ...]     # constants


class Unsupported(NamedTuple):
    """Valid formula text that fill does not compute (``A:A``, ``[1]Sheet!A1`` ...)."""
    reason: str


Node = Union[Num, Text, Bool, Missing, ErrorLit, Ref, Name, Neg, Percent, BinOp, Call, ArrayLit,
             Unsupported]

_XL_PREFIXES = ("_XLFN.", "_XLUDF.", "_XLWS.")


def canonical_function(raw: str) -> str:
    """``'_xlfn._xludf.sf_stepat'`` -> ``'SF_STEPAT'`` (``@`` is handled by the parser)."""
    name = raw.upper()
    stripped = True
    while stripped:
        stripped = False
        for p in _XL_PREFIXES:
            if name.startswith(p):
                name = name[len(p):]
                stripped = True
    return name


def tokenize(text: str) -> list[Token]:
    """Tokens of ``text``; WorkbookError if unreadable.  White space is dropped,
    except between two ranges, where it is Excel's intersection operator."""
    try:
        items = Tokenizer(text).items
    except IndexError:          # the tokenizer pops an empty stack on a stray ')'
        raise WorkbookError(f"cannot read the formula {_clip(text)}: a ')' has no matching '('") from None
    except Exception as exc:    # TokenizerError and the asserts inside the tokenizer
        raise WorkbookError(f"cannot read the formula {_clip(text)}: {_short(exc, text)}") from exc
    out: list[Token] = []
    for k, t in enumerate(items):
        if t.type != Token.WSPACE:
            out.append(t)
        elif (out and k + 1 < len(items) and _ends_operand(out[-1]) and _starts_operand(items[k + 1])):
            out.append(Token(" ", Token.OP_IN))     # a space between two ranges: intersection
    return out


def _ends_operand(t: Token) -> bool:
    return bool(t.subtype == Token.RANGE or (t.subtype == Token.CLOSE and t.type != Token.ARRAY))


def _starts_operand(t: Token) -> bool:
    return bool(t.subtype == Token.RANGE or (t.subtype == Token.OPEN and t.type != Token.ARRAY))


def parse_formula(text: str, sheet: str, prefix: str) -> Node:
    """Tree of formula ``text`` (with its ``=``) written on ``sheet``."""
    return parse_tokens(tokenize(text), text, sheet, prefix)


def parse_tokens(tokens: list[Token], text: str, sheet: str, prefix: str) -> Node:
    """Tree from the tokens ``tokenize(text)`` returned."""
    try:
        tree = _Parser(tokens, text, sheet, prefix.upper()).parse()
    except RecursionError:
        tree = None
    if tree is None or _depth(tree) > MAX_TREE_DEPTH:
        # the evaluator and the tree walks recurse; keep them far from Python's limit
        raise WorkbookError(f"cannot read the formula {_clip(text)}: "
                            "it is too long or nested too deeply")
    return tree


def _depth(tree: Node) -> int:
    deepest, todo = 0, [(tree, 1)]
    while todo:
        node, d = todo.pop()
        deepest = max(deepest, d)
        if isinstance(node, BinOp):
            # a chain such as A1+A2+...+An is walked along its left spine without
            # recursion (by every walker), so it counts as one level, not n
            todo += [(node.left, d if isinstance(node.left, BinOp) else d + 1), (node.right, d + 1)]
        elif isinstance(node, (Neg, Percent)):
            todo.append((node.operand, d + 1))
        elif isinstance(node, Call):
            todo += [(a, d + 1) for a in node.args]
    return deepest


def parse_name_text(text: str, sheet: str, prefix: str) -> Node:
    """Tree of a defined name's text (stored without ``=``)."""
    return parse_formula(text if text.startswith("=") else "=" + text, sheet, prefix)


class _Parser:
    """Recursive descent with Excel's precedence:
    ``-x`` > ``%`` > ``^`` > ``* /`` > ``+ -`` > ``&`` > comparisons.

    Excel negates before it raises to a power (``=-2^2`` is 4) and ``^`` groups
    from the left (``=2^3^2`` is 64); both are kept.
    """

    def __init__(self, tokens: list[Token], text: str, sheet: str, prefix: str):
        self.toks, self.text, self.sheet, self.prefix = tokens, text, sheet, prefix
        self.pos = 0

    def fail(self, reason: str) -> WorkbookError:
        return WorkbookError(f"cannot read the formula {_clip(self.text)}: {reason}")

    def peek(self) -> Token | None:
        return self.toks[self.pos] if self.pos < len(self.toks) else None

    def parse(self) -> Node:
        if not self.toks:
            raise self.fail("it is empty")
        if self.toks[0].type == Token.LITERAL:
            raise self.fail("it does not start with '='")
        node = self.expr()
        tok = self.peek()
        if tok is not None:
            raise self.fail(f"unexpected '{tok.value}'")
        return node

    def expr(self) -> Node:
        # comparisons, '&' and the range union ',' are kept in the tree; the
        # evaluator refuses them, so such a cell gets an error, not the whole file
        return self._binary(("=", "<", ">", "<=", ">=", "<>", ",", " "), self.concat)

    def concat(self) -> Node:
        return self._binary(("&",), self.additive)

    def _binary(self, ops: tuple[str, ...], sub: Callable[[], Node]) -> Node:
        node = sub()
        while True:
            tok = self.peek()
            if tok is None or tok.type != Token.OP_IN or tok.value not in ops:
                return node
            self.pos += 1
            node = BinOp(tok.value, node, sub())

    def additive(self) -> Node:
        return self._binary(("+", "-"), self.multiplicative)

    def multiplicative(self) -> Node:
        return self._binary(("*", "/"), self.power)

    def power(self) -> Node:
        return self._binary(("^",), self.unary)

    def unary(self) -> Node:
        tok = self.peek()
        if tok is not None and tok.type == Token.OP_PRE:
            self.pos += 1
            inner = self.unary()
            return Neg(inner) if tok.value == "-" else inner
        node = self.primary()
        while (tok := self.peek()) is not None and tok.type == Token.OP_POST:
            self.pos += 1
            node = Percent(node)
        return node

    def primary(self) -> Node:
        tok = self.peek()
        if tok is None:
            raise self.fail("it ends too early")
        self.pos += 1
        if tok.type == Token.OPERAND:
            return self.operand(tok)
        if tok.type == Token.FUNC and tok.subtype == Token.OPEN:
            return self.call(tok.value[:-1])
        if tok.type == Token.PAREN and tok.subtype == Token.OPEN:
            node = self.expr()
            self.expect(Token.PAREN)
            return node
        if tok.type == Token.ARRAY and tok.subtype == Token.OPEN:
            return self.array()
        raise self.fail(f"unexpected '{tok.value}'")

    def expect(self, kind: str) -> None:
        tok = self.peek()
        if tok is None:
            raise self.fail("a '(' is not closed")
        if tok.type != kind or tok.subtype != Token.CLOSE:
            raise self.fail(f"unexpected '{tok.value}'")
        self.pos += 1

    def operand(self, tok: Token) -> Node:
        value = tok.value
        if tok.subtype == Token.NUMBER:
            return Num(float(value))
        if tok.subtype == Token.TEXT:
            return Text(value[1:-1].replace('""', '"'))
        if tok.subtype == Token.LOGICAL:
            return Bool(value == "TRUE")
        if tok.subtype == Token.ERROR:
            return ErrorLit(value[value.index("#"):])
        if value.upper() in ("TRUE", "FALSE"):
            return Bool(value.upper() == "TRUE")
        try:
            return parse_reference(value, self.sheet)
        except WorkbookError as exc:
            return Unsupported(exc.message)

    def call(self, raw: str) -> Node:
        implicit = raw.startswith("@")
        name = canonical_function(raw.lstrip("@"))
        args: list[Node] = []
        tok = self.peek()
        if tok is not None and tok.type == Token.FUNC and tok.subtype == Token.CLOSE:
            self.pos += 1
        else:
            while True:
                tok = self.peek()
                if tok is not None and (tok.type == Token.SEP
                                        or (tok.type == Token.FUNC and tok.subtype == Token.CLOSE)):
                    args.append(Missing())
                else:
                    args.append(self.expr())
                tok = self.peek()
                if tok is None:
                    raise self.fail(f"the '(' after {name} is not closed")
                if tok.type == Token.SEP and tok.subtype == Token.ARG:
                    self.pos += 1
                    continue
                self.expect(Token.FUNC)
                break
        node: Node = Call(name, name.startswith(self.prefix), tuple(args))
        # '@' asks for implicit intersection, which for a computed array is its first item
        return Call("SINGLE", False, (node,)) if implicit else node

    def array(self) -> Node:
        rows: list[tuple[Any, ...]] = []
        row: list[Any] = []
        while True:
            tok = self.peek()
            if tok is None:
                raise self.fail("a '{' is not closed")
            self.pos += 1
            sign = 1.0
            if tok.type == Token.OP_PRE:
                sign = -1.0 if tok.value == "-" else 1.0
                tok = self.peek()
                if tok is None or tok.subtype != Token.NUMBER:
                    raise self.fail("only constants may appear inside { }")
                self.pos += 1
            if tok.type != Token.OPERAND or tok.subtype == Token.RANGE:
                raise self.fail("only constants may appear inside { }")
            item = self.operand(tok)
            if isinstance(item, Num):
                row.append(sign * item.value)
            elif isinstance(item, (Text, Bool, ErrorLit)):
                row.append(item[0])
            else:
                raise self.fail("only constants may appear inside { }")
            tok = self.peek()
            if tok is None:
                raise self.fail("a '{' is not closed")
            self.pos += 1
            if tok.type == Token.SEP and tok.subtype == Token.ROW:
                rows.append(tuple(row))
                row = []
            elif tok.type == Token.ARRAY and tok.subtype == Token.CLOSE:
                rows.append(tuple(row))
                break
            elif not (tok.type == Token.SEP and tok.subtype == Token.ARG):
                raise self.fail(f"unexpected '{tok.value}' inside {{ }}")
        if len({len(r) for r in rows}) != 1:
            raise self.fail("the rows of { } have different lengths")
        return ArrayLit(tuple(rows))


def _clip(text: str, n: int = 60) -> str:
    return repr(text if len(text) <= n else text[: n - 3] + "...")

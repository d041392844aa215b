"""The syntax of stepper's expressions: tokens, the parser, the tree of frozen nodes.

Grammar (ordinary arithmetic over names, integer powers, no division)::

    expr   := term (("+" | "-") term)*
    term   := unary ("*" unary)*
    unary  := "-" unary | power
    power  := atom ("^" INTEGER)?
    atom   := INTEGER | NAME | NAME "[" INTEGER "]" | "(" expr ")"
            | "eq" "(" point ")" | "eq" "(" point "," point ")" | "final" "(" NAME ")"
    point  := NAME | "point" "(" NAME ")"
    NAME   := [A-Za-z_][A-Za-z0-9_.]*

:func:`parse_tree` builds the tree (never ``eval``) and the :class:`References` it
reads; a text that does not fit raises :class:`stepper.errors.ExpressionError`
whose ``column`` points at the offending character. The text is at most
``MAX_EXPR_LENGTH`` characters; parentheses, signs and calls nest at most
``_MAX_DEPTH`` deep; a long chain of ``+`` or ``*`` becomes a balanced tree, so
no walk over a tree recurses deeper than about ``_MAX_DEPTH`` times the
logarithm of the length. Texts that differ only in their names share one token
template. Evaluation lives in :mod:`stepper.field.expr`.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, Union

from stepper.errors import ExpressionError

__all__ = ["Const", "Table", "Neg", "Add", "Sub", "Mul", "Pow", "Index", "Eq", "PointOf", "FinalOf", "Node",
           "References", "Template", "references", "parse_tree", "template_of", "templates_of", "fill", "MAX_EXPR_LENGTH",
           "MAX_EXPONENT_BITS"]

MAX_EXPR_LENGTH = 4096
MAX_EXPONENT_BITS = 256
_MAX_DEPTH = 64
_LEFT_DEEP = 16  # chains up to this many operands keep the plain left-to-right tree
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_.]*")
_SPACE = re.compile(r"[ \t\r\n]*")


@dataclass(frozen=True, slots=True)
class Const:
    """An integer constant (reduced mod p when evaluated)."""

    value: int


@dataclass(frozen=True, slots=True)
class Table:
    """The named value: a table's multilinear extension in a combine, a named
    element (or a list, where a point is wanted) in a glue expression."""

    name: str


@dataclass(frozen=True, slots=True)
class Neg:
    operand: "Node"


@dataclass(frozen=True, slots=True)
class Add:
    left: "Node"
    right: "Node"


@dataclass(frozen=True, slots=True)
class Sub:
    left: "Node"
    right: "Node"


@dataclass(frozen=True, slots=True)
class Mul:
    left: "Node"
    right: "Node"


@dataclass(frozen=True, slots=True)
class Pow:
    """``base ^ exponent`` with a non-negative integer exponent."""

    base: "Node"
    exponent: int


@dataclass(frozen=True, slots=True)
class Index:
    """Component ``index`` (0-based) of the list value ``name``."""

    name: str
    index: int


@dataclass(frozen=True, slots=True)
class PointOf:
    """The challenge point of the earlier instance ``name`` (x_1..x_mu)."""

    name: str


@dataclass(frozen=True, slots=True)
class FinalOf:
    """The final value of the earlier instance ``name``."""

    name: str


@dataclass(frozen=True, slots=True)
class Eq:
    """eq(left, right); ``right`` None means the instance's own challenge point.
    Each side is a :class:`Table` naming a list value or a :class:`PointOf`."""

    left: Union[Table, PointOf]
    right: Union[Table, PointOf, None] = None


Node = Union[Const, Table, Neg, Add, Sub, Mul, Pow, Index, Eq, PointOf, FinalOf]


@dataclass(frozen=True, slots=True)
class References:
    """What a glue expression needs: named values (as elements, as lists), instances
    whose point or final it reads, and whether it uses its own instance's point."""

    scalars: tuple[str, ...] = ()
    lists: tuple[str, ...] = ()
    points: tuple[str, ...] = ()
    finals: tuple[str, ...] = ()
    own_point: bool = False

    @property
    def values(self) -> tuple[str, ...]:
        """Every named value, scalar or list, in order of first appearance."""
        return tuple(dict.fromkeys((*self.scalars, *self.lists)))


def references(root: Node) -> References:
    scalars: dict[str, None] = {}
    lists: dict[str, None] = {}
    points: dict[str, None] = {}
    finals: dict[str, None] = {}
    own = [False]

    def side(node: object) -> None:
        if isinstance(node, Table):
            lists.setdefault(node.name)
        elif isinstance(node, PointOf):
            points.setdefault(node.name)

    def walk(node: Node) -> None:
        if isinstance(node, Table):
            scalars.setdefault(node.name)
        elif isinstance(node, Index):
            lists.setdefault(node.name)
        elif isinstance(node, FinalOf):
            finals.setdefault(node.name)
        elif isinstance(node, PointOf):
            points.setdefault(node.name)
        elif isinstance(node, Eq):
            side(node.left)
            if node.right is None:
                own[0] = True
            else:
                side(node.right)
        elif isinstance(node, Neg):
            walk(node.operand)
        elif isinstance(node, Pow):
            walk(node.base)
        elif isinstance(node, (Add, Sub, Mul)):
            walk(node.left)
            walk(node.right)

    walk(root)
    return References(tuple(scalars), tuple(lists), tuple(points), tuple(finals), own[0])


def parse_tree(text: str, what: str = "combine expression") -> tuple[Node, References]:
    """The tree of ``text`` and what it references; raises :class:`ExpressionError` pointing at the first
    character that does not fit the grammar (``what`` names the text in messages)."""
    if not isinstance(text, str):
        raise ExpressionError(f"expected the {what} as text, found {type(text).__name__}", "", 0)
    if len(text) > MAX_EXPR_LENGTH:
        raise ExpressionError(
            f"expected a {what} of at most {MAX_EXPR_LENGTH} characters, found {len(text)}",
            text[:80],
            0,
        )
    fast = _fast_parse_refs(text)
    if fast is not None:
        return fast
    parser = _Parser(text, what)
    root = parser.expr(0)
    parser.skip_space()
    if parser.pos < len(text):
        parser.fail(f"expected an operator (+, -, *, ^) or the end, found {text[parser.pos]!r}")
    return root, references(root)


_TOKEN = re.compile(r"[ \t\r\n]*(?:([0-9]+)|([A-Za-z_][A-Za-z0-9_.]*)|([^ \t\r\n]))")


_CALLS = frozenset(("eq", "point", "final"))
_SPLIT = re.compile(r"([A-Za-z_][A-Za-z0-9_.]*)")  # the NAME of _TOKEN: parts alternate text between names, name
_TEMPLATES: dict[tuple[str, ...], Template] = {}  # text with its names cut out -> template
_MAX_TEMPLATES = 512


@dataclass(frozen=True, slots=True)
class Template:
    """The tree shared by texts that differ only in their names: names are holes ``#0``,
    ``#1``, ... in order of appearance (a call word used as a name stays itself), with the
    references of the tree (hole names) and, per kind of reference, what fills it: a hole's
    number or a word kept as it is."""

    root: Node
    refs: References
    plan: tuple[tuple[int | str, ...], ...]  # scalars, lists, points, finals

    def references(self, names: list[str]) -> References:
        """The references of the text whose names are ``names``, each kept at its first appearance
        (the holes are one per occurrence, so nothing was merged in the template)."""
        scalars, lists, points, finals = self.plan
        refs: Any = _ReferencesDraft()  # every field built here: skip the frozen __init__ (one per glue text)
        refs.scalars = _pick(scalars, names) if scalars else ()
        refs.lists = _pick(lists, names) if lists else ()
        refs.points = _pick(points, names) if points else ()
        refs.finals = _pick(finals, names) if finals else ()
        refs.own_point = self.refs.own_point
        refs.__class__ = References
        return refs


class _ReferencesDraft:
    """A blank with the slots of :class:`References`, filled and then given that class (as
    stepper.transcript.model.RoundMsgDraft does for rounds)."""

    __slots__ = References.__slots__  # type: ignore[attr-defined]


def _pick(kind: tuple[int | str, ...], names: list[str]) -> tuple[str, ...]:
    return tuple(dict.fromkeys([names[i] if isinstance(i, int) else i for i in kind]))


def _fast_parse(text: str) -> Node | None:
    """The tree of :func:`_fast_parse_refs` alone."""
    fast = _fast_parse_refs(text)
    return None if fast is None else fast[0]


def _fast_parse_refs(text: str) -> tuple[Node, References] | None:
    """The tree of a well-formed text and its references, from its template (see
    :func:`template_of`), or None when the character parser must decide."""
    found = template_of(text)
    if found is None:
        return None
    template, names = found
    return fill(template.root, names), template.references(names)


def template_of(text: str) -> tuple[Template, list[str]] | None:
    """The template of a well-formed text and its names in order of appearance, or None for
    anything unusual (an error, a deep nesting, a huge exponent): then the character parser
    decides and names the column. Both build the same tree.

    Texts that differ only in their names (``a7 + beta7*b7``, ``a8 + beta8*b8``: glue
    names are unique in a proof) share one template, found by the text with its names
    cut out (one regex split, the names' pattern being the tokenizer's); the first such
    text builds it from one regex pass over its tokens. A text longer than ``MAX_EXPR_LENGTH``
    has none: the character parser refuses it."""
    if len(text) > MAX_EXPR_LENGTH:
        return None
    parts = _SPLIT.split(text)
    words = parts[1::2]
    key = (*parts[0::2], *[w if w in _CALLS else "" for w in words])
    names = [w for w in words if w not in _CALLS]
    template = _TEMPLATES.get(key)
    if template is None:
        tokens = _TOKEN.findall(text)
        if len(tokens) > 2048:
            return None
        holes = iter(range(len(names)))
        shaped = [(n, f"#{next(holes)}" if w and w not in _CALLS else w, o) for n, w, o in tokens]
        root = _parse_tokens(shaped)  # type: ignore[arg-type]
        if root is None:
            return None
        if len(_TEMPLATES) >= _MAX_TEMPLATES:
            _TEMPLATES.clear()
        refs = references(root)
        plan = tuple(tuple(int(n[1:]) if n[0] == "#" else n for n in kind)
                     for kind in (refs.scalars, refs.lists, refs.points, refs.finals))
        template = _TEMPLATES[key] = Template(root, refs, plan)
    return template, names


# a name the template path cuts out (see templates_of): _SPLIT's NAME where a match of it starts (never right
# after a letter or '_', which would belong to the name before), unless it is a call word
_HOLE = re.compile(r"(?<![A-Za-z_])(?!(?:eq|point|final)(?![A-Za-z0-9_.]))[A-Za-z_][A-Za-z0-9_.]*")


def templates_of(texts: list[str]) -> list[tuple[Template, list[list[str]], list[int]]] | None:
    """:func:`template_of` for many texts at once, grouped: per template, the names filling each
    hole as a column (one entry per text of the group) and the positions in ``texts`` of the
    group's texts; None when some text has no template. The texts are joined by newlines and
    read by two regex passes (the names cut out, and the names in order); texts with the same
    text between their names share a template, found once (a text holding a newline or a NUL
    is read alone). None too when some text is longer than ``MAX_EXPR_LENGTH``, which the
    character parser refuses (only the first text of a shape goes through :func:`template_of`)."""
    joined = "\n".join(texts)
    if len(joined) > MAX_EXPR_LENGTH and max(map(len, texts)) > MAX_EXPR_LENGTH:
        return None
    if "\x00" in joined or joined.count("\n") != len(texts) - 1:
        singles = [template_of(text) for text in texts]
        if any(found is None for found in singles):
            return None
        return [(found[0], [[name] for name in found[1]], [i]) for i, found in enumerate(singles)]  # type: ignore[index]
    uniform = _one_shape(texts, joined)
    if uniform is not None:
        return uniform
    shapes = _HOLE.sub("\x00", joined).split("\n")
    names = _HOLE.findall(joined)
    groups: dict[str, tuple[list[int], list[int]]] = {}  # shape -> positions, first name of each text
    at = 0
    for i, shape in enumerate(shapes):
        group = groups.get(shape)
        if group is None:
            group = groups[shape] = ([], [])
        group[0].append(i)
        group[1].append(at)
        at += shape.count("\x00")
    out = []
    for shape, (positions, starts) in groups.items():
        found = template_of(texts[positions[0]])
        holes = shape.count("\x00")
        if found is None or len(found[1]) != holes:
            return None
        out.append((found[0], [[names[a + j] for a in starts] for j in range(holes)], positions))
    return out


# every ASCII character that cannot stand in a name, made a space: a text's words are then its str.split()
_NAME_CHARS = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_.")
_WORD_GAPS = bytes(c if chr(c) in _NAME_CHARS else 0x20 for c in range(256))  # a bytes.translate table
_WORD_RUN = re.compile(r"([A-Za-z0-9_.]+)")  # a maximal run of name characters: a name, a number or a mix
_NOT_A_NAME_START = re.compile(r"\n[0-9.]")  # in words joined after newlines: a word that starts as no name does


def _one_shape(texts: list[str], joined: str) -> list[tuple[Template, list[list[str]], list[int]]] | None:
    """:func:`templates_of` when every text has the same text between its words (the usual case:
    one expression per instance, its names numbered), or None when they do not (or a call word
    stands where another text has a name). The words of all texts are cut at once without a
    regex (every character that cannot stand in a name made a space, then ``str.split``); the
    joined texts, rebuilt from the first text's separators and every text's words, must be the
    texts themselves, and every word where the first text has a name must start as a name does
    (so the tokenizer reads every text as it reads the first)."""
    if not joined.isascii():
        return None
    words = joined.encode("ascii").translate(_WORD_GAPS).decode("ascii").split()  # bytes.translate: a table look-up a byte
    n = len(texts)
    width, rest = divmod(len(words), n)
    if rest or not width:
        return None
    parts = _WORD_RUN.split(texts[0])
    seps, first = parts[0::2], parts[1::2]
    if len(first) != width:
        return None
    rebuilt: list[str | None] = [None] * (2 * n * width + 1)
    rebuilt[0] = seps[0]
    rebuilt[1::2] = words
    rebuilt[2::2] = [*seps[1:-1], f"{seps[-1]}\n{seps[0]}"] * n
    rebuilt[-1] = seps[-1]
    if "".join(rebuilt) != joined:  # type: ignore[arg-type]
        return None
    holes: list[list[str]] = []
    for j, word in enumerate(first):
        column = words[j::width]
        if word[0] < "A" or word in _CALLS:  # a number (or a mix the tokenizer cuts) or a call word: a fixed word
            if column.count(word) != n:
                return None
        elif _NOT_A_NAME_START.search("\n" + "\n".join(column)) or not _CALLS.isdisjoint(column):  # a name here
            # must start as one (a letter or '_', not a digit or '.'), no call word
            return None
        else:
            holes.append(column)
    found = template_of(texts[0])
    if found is None or found[1] != [column[0] for column in holes]:
        return None
    return [(found[0], holes, list(range(n)))]


def fill(node: Node, names: list[str]) -> Node:
    """The template ``node`` with hole ``#i`` replaced by ``names[i]`` (a call word used
    as a name, ``eq``, ``point`` or ``final``, stays in the template as itself)."""
    if isinstance(node, Const):
        return node
    if isinstance(node, Table):
        return Table(names[int(node.name[1:])]) if node.name[0] == "#" else node
    if isinstance(node, Index):
        return Index(names[int(node.name[1:])], node.index) if node.name[0] == "#" else node
    if isinstance(node, PointOf):
        return PointOf(names[int(node.name[1:])]) if node.name[0] == "#" else node
    if isinstance(node, FinalOf):
        return FinalOf(names[int(node.name[1:])]) if node.name[0] == "#" else node
    if isinstance(node, Eq):
        left = fill(node.left, names)
        right = None if node.right is None else fill(node.right, names)
        return Eq(left, right)  # type: ignore[arg-type]  # a side is a Table or PointOf, filled as one
    if isinstance(node, Neg):
        return Neg(fill(node.operand, names))
    if isinstance(node, Pow):
        return Pow(fill(node.base, names), node.exponent)
    if isinstance(node, Add):
        return Add(fill(node.left, names), fill(node.right, names))
    if isinstance(node, Sub):
        return Sub(fill(node.left, names), fill(node.right, names))
    return Mul(fill(node.left, names), fill(node.right, names))


def _parse_tokens(tokens: list[tuple[str, str, str]]) -> Node | None:
    """The recursive descent of :func:`_fast_parse` over (number, name, other) tokens."""
    kinds: list[str] = []
    values: list[str] = []
    for number, name, other in tokens:
        if number:
            kinds.append("n")
            values.append(number)
        elif name:
            kinds.append("w")
            values.append(name)
        else:
            kinds.append(other)
            values.append(other)
    kinds.append("")
    values.append("")
    pos = 0

    def expr(depth: int) -> Node | None:
        nonlocal pos
        first = term(depth)
        if first is None:
            return None
        items: list[tuple[bool, Node]] = [(True, first)]
        while kinds[pos] in ("+", "-"):
            positive = kinds[pos] == "+"
            pos += 1
            nxt = term(depth)
            if nxt is None:
                return None
            items.append((positive, nxt))
        if len(items) > _LEFT_DEEP:
            return _balanced(items, product=False)
        node = items[0][1]
        for positive, right in items[1:]:
            node = Add(node, right) if positive else Sub(node, right)
        return node

    def term(depth: int) -> Node | None:
        nonlocal pos
        factors = [unary(depth)]
        while kinds[pos] == "*":
            pos += 1
            factors.append(unary(depth))
        if any(f is None for f in factors):
            return None
        if len(factors) > _LEFT_DEEP:
            return _balanced([(True, f) for f in factors], product=True)  # type: ignore[misc]
        node = factors[0]
        for right in factors[1:]:
            node = Mul(node, right)  # type: ignore[arg-type]
        return node

    def unary(depth: int) -> Node | None:
        nonlocal pos
        if depth > _MAX_DEPTH // 2:
            return None
        if kinds[pos] == "-":
            pos += 1
            inner = unary(depth + 1)
            return None if inner is None else Neg(inner)
        node = atom(depth)
        if node is None or kinds[pos] != "^":
            return node
        if kinds[pos + 1] != "n" or kinds[pos + 2] == "^" or len(values[pos + 1]) > 60:
            return None
        exponent = int(values[pos + 1])
        pos += 2
        return Pow(node, exponent)

    def point() -> Table | PointOf | None:
        nonlocal pos
        if kinds[pos] != "w":
            return None
        if values[pos] == "point" and kinds[pos + 1] == "(":
            if kinds[pos + 2] != "w" or kinds[pos + 3] != ")":
                return None
            pos += 4
            return PointOf(values[pos - 2])
        if kinds[pos + 1] == "(":
            return None
        pos += 1
        return Table(values[pos - 1])

    def atom(depth: int) -> Node | None:
        nonlocal pos
        kind = kinds[pos]
        if kind == "(":
            pos += 1
            node = expr(depth + 1)
            if node is None or kinds[pos] != ")":
                return None
            pos += 1
            return node
        if kind == "n":
            if kinds[pos + 1] == "w":
                return None
            pos += 1
            return Const(int(values[pos - 1]))
        if kind != "w":
            return None
        name = values[pos]
        pos += 1
        if kinds[pos] == "(":
            pos += 1
            if name == "final":
                if kinds[pos] != "w" or kinds[pos + 1] != ")":
                    return None
                pos += 2
                return FinalOf(values[pos - 2])
            if name != "eq":
                return None
            left = point()
            if left is None:
                return None
            right = None
            if kinds[pos] == ",":
                pos += 1
                right = point()
                if right is None:
                    return None
            if kinds[pos] != ")":
                return None
            pos += 1
            return Eq(left, right)
        if kinds[pos] == "[":
            if kinds[pos + 1] != "n" or kinds[pos + 2] != "]":
                return None
            pos += 3
            return Index(name, int(values[pos - 2]))
        return Table(name)

    root = expr(0)
    if root is None or kinds[pos] != "":
        return None
    return root


def _balanced(items: list[tuple[bool, Node]], product: bool) -> Node:
    """A balanced tree over a chain of signed terms (or factors): depth log2 of the length."""
    while len(items) > 1:
        nxt: list[tuple[bool, Node]] = []
        for i in range(0, len(items) - 1, 2):
            (pa, a), (pb, b) = items[i], items[i + 1]
            if product:
                nxt.append((True, Mul(a, b)))
            elif pa and pb:
                nxt.append((True, Add(a, b)))
            elif pa:
                nxt.append((True, Sub(a, b)))
            elif pb:
                nxt.append((True, Sub(b, a)))
            else:
                nxt.append((False, Add(a, b)))
        if len(items) % 2:
            nxt.append(items[-1])
        items = nxt
    positive, node = items[0]
    return node if positive else Neg(node)


class _Parser:
    def __init__(self, text: str, what: str) -> None:
        self.text = text
        self.what = what
        self.pos = 0

    def fail(self, message: str, column: int | None = None) -> None:
        col = self.pos if column is None else column
        raise ExpressionError(f"{message} at column {col + 1} of the {self.what}", self.text, col)

    def skip_space(self) -> None:
        self.pos = _SPACE.match(self.text, self.pos).end()  # type: ignore[union-attr]

    def peek(self) -> str:
        self.skip_space()
        return self.text[self.pos] if self.pos < len(self.text) else ""

    def expr(self, depth: int) -> Node:
        items: list[tuple[bool, Node]] = [(True, self.term(depth))]
        while self.peek() in ("+", "-"):
            op = self.text[self.pos]
            self.pos += 1
            items.append((op == "+", self.term(depth)))
        if len(items) > _LEFT_DEEP:
            return _balanced(items, product=False)
        node = items[0][1]
        for positive, right in items[1:]:
            node = Add(node, right) if positive else Sub(node, right)
        return node

    def term(self, depth: int) -> Node:
        factors = [self.unary(depth)]
        while self.peek() == "*":
            self.pos += 1
            if self.peek() == "*":
                self.fail("expected a name, a number or '(' after '*' ('**' is not supported; write '^')")
            factors.append(self.unary(depth))
        if len(factors) > _LEFT_DEEP:
            return _balanced([(True, f) for f in factors], product=True)
        node = factors[0]
        for right in factors[1:]:
            node = Mul(node, right)
        return node

    def unary(self, depth: int) -> Node:
        if depth > _MAX_DEPTH:
            self.fail(f"expected at most {_MAX_DEPTH} nested parentheses, signs or calls, found more")
        if self.peek() == "-":
            self.pos += 1
            return Neg(self.unary(depth + 1))
        return self.power(depth)

    def power(self, depth: int) -> Node:
        node = self.atom(depth)
        if self.peek() != "^":
            return node
        self.pos += 1
        self.skip_space()
        start = self.pos
        exponent = self.integer("an integer exponent after '^'")
        if exponent.bit_length() > MAX_EXPONENT_BITS:
            self.fail(f"expected an exponent below 2^{MAX_EXPONENT_BITS}, found one of {exponent.bit_length()} "
                      f"bits", start)
        if self.peek() == "^":
            self.fail("expected one '^' per factor (write (a^b)^c with parentheses)")
        return Pow(node, exponent)

    def integer(self, wanted: str) -> int:
        start = self.pos
        while self.pos < len(self.text) and self.text[self.pos].isascii() and self.text[self.pos].isdigit():
            self.pos += 1
        if self.pos == start:
            found = repr(self.text[self.pos]) if self.pos < len(self.text) else "the end"
            self.fail(f"expected {wanted}, found {found}")
        if self.pos < len(self.text) and (self.text[self.pos].isalpha() or self.text[self.pos] == "_"):
            self.fail(f"expected an operator after the number {self.text[start:self.pos]}, "
                      f"found {self.text[self.pos]!r}")
        return int(self.text[start:self.pos])

    def name(self, wanted: str) -> str:
        self.skip_space()
        found = _NAME.match(self.text, self.pos)
        if found is None:
            ch = self.text[self.pos] if self.pos < len(self.text) else ""
            self.fail(f"expected {wanted}, found {repr(ch) if ch else 'the end'}")
            raise AssertionError("unreachable")
        self.pos = found.end()
        return found.group()

    def expect(self, ch: str, after: str) -> None:
        if self.peek() != ch:
            found = repr(self.text[self.pos]) if self.pos < len(self.text) else "the end"
            self.fail(f"expected {ch!r} {after}, found {found}")
        self.pos += 1

    def point(self) -> Union[Table, PointOf]:
        start = self.pos
        name = self.name("a point: a list value's name or point(NAME)")
        if name == "point" and self.peek() == "(":
            self.pos += 1
            inner = self.name("an instance name inside point(...)")
            self.expect(")", "to close point(")
            return PointOf(inner)
        if self.peek() == "(":
            self.fail(f"expected a point: a list value's name or point(NAME), found a call of {name!r}", start)
        return Table(name)

    def atom(self, depth: int) -> Node:
        ch = self.peek()
        start = self.pos
        if ch == "":
            self.fail("expected a name, a number or '(', found the end of the expression")
        if ch == "(":
            self.pos += 1
            node = self.expr(depth + 1)
            if self.peek() != ")":
                found = repr(self.text[self.pos]) if self.pos < len(self.text) else "the end"
                self.fail(f"expected ')' to close the '(' at column {start + 1}, found {found}")
            self.pos += 1
            return node
        if ch.isascii() and ch.isdigit():
            return Const(self.integer("a number"))
        if ch.isascii() and (ch.isalpha() or ch == "_"):
            name = self.name("a name")
            nxt = self.peek()
            if nxt == "(":
                if name not in ("eq", "point", "final"):
                    self.fail(f"expected an operator after {name!r}, found '(' (the only calls are eq(...), "
                              "final(...) and, inside eq, point(...))")
                self.pos += 1
                if name == "final":
                    node: Node = FinalOf(self.name("an instance name inside final(...)"))  # type: ignore[no-redef]
                elif name == "point":
                    self.fail("expected point(NAME) only inside eq(...), where a point is wanted", start)
                    raise AssertionError("unreachable")
                else:
                    left = self.point()
                    right = None
                    if self.peek() == ",":
                        self.pos += 1
                        right = self.point()
                    node = Eq(left, right)
                self.expect(")", f"to close the {name}( at column {start + 1}")
                return node
            if nxt == "[":
                self.pos += 1
                self.skip_space()
                index = self.integer("a component index (0, 1, ...) inside [...]")
                self.expect("]", f"to close the [ after {name}")
                return Index(name, index)
            return Table(name)
        if ch == "/":
            self.fail("expected +, - or *; division is not part of an expression, found '/'")
        self.fail(f"expected a name, a number or '(', found {ch!r}")
        raise AssertionError("unreachable")  # fail() always raises

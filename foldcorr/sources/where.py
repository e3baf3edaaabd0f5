"""The filter language of prediction tables: ``--where`` row filters.

A filter is parsed once into a :class:`Where` (a tree of comparisons joined by
``and`` / ``or`` / ``not``; no code is ever evaluated) and turned into a
``pyarrow.compute.Expression`` for the schema of each table it filters, so
that the Parquet reader can push it down.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from foldcorr.errors import InvalidInputError
from foldcorr.tensor.coding import BOOL_TEXT

__all__ = ["Where", "ExpressionWhere", "parse_where", "as_where", "MAX_DEPTH", "MAX_TERMS",
           "MAX_TEXT"]

#: A decimal number written as text (after trimming), as a filter reads one.
_NUMBER_TEXT = r"^[+-]?([0-9]+\.?[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?$"

_TOKEN = re.compile(r"""\s*(?:
    (?P<str>"(?:[^"\\]|\\.)*"|'(?:[^'\\]|\\.)*')
  | (?P<num>[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)
  | (?P<op>==|!=|<=|>=|<|>|\(|\)|,)
  | (?P<name>[A-Za-z_][A-Za-z0-9_.]*|`[^`]+`)
)""", re.VERBOSE)

_COMPARE = ("==", "!=", "<", "<=", ">", ">=")

#: Deepest nesting of parentheses and ``not`` a filter may have.
MAX_DEPTH = 50
#: Most comparisons a filter may hold.
MAX_TERMS = 1000
#: Longest filter text read, in characters.
MAX_TEXT = 100_000


@dataclass(frozen=True)
class Where:
    """A parsed row filter: a tree of comparisons joined by ``and``/``or``/``not``.

    Attributes
    ----------
    text : str
        The filter as written.
    tree : tuple
        ``("cmp", column, op, value)``, ``("in", column, values)``,
        ``("not", node)``, ``("and", a, b, ...)`` or ``("or", a, b, ...)`` (a chain of
        one operator is one node).
    """

    text: str
    tree: tuple

    @property
    def columns(self) -> list[str]:
        """Columns the filter reads, in order of first use."""
        out: list[str] = []

        def walk(node):
            if node[0] in ("cmp", "in"):
                if node[1] not in out:
                    out.append(node[1])
            else:
                for child in node[1:]:
                    walk(child)

        walk(self.tree)
        return out

    def check_columns(self, names) -> None:
        """Raise when the filter names a column not among ``names``.

        Examples
        --------
        >>> parse_where('split == "test"').check_columns(["actual", "predicted"])
        Traceback (most recent call last):
        ...
        foldcorr.errors.InvalidInputError: `where` names column 'split', which the table does not have; it has ['actual', 'predicted']
        """
        for column in self.columns:
            if column not in names:
                raise InvalidInputError(
                    f"`where` names column {column!r}, which the table does not have; "
                    f"it has {list(names)!r}")

    def expression(self, schema):
        """The filter as a ``pyarrow.compute.Expression`` for a table of ``schema``.

        A number compared with a text column matches the texts that read as
        that number (``1``, ``1.0``, `` 1 ``), and is ordered against the
        column's values read as numbers (a text that is not a number is then
        an error); ``true``/``false`` match ``True``/``TRUE``/``true`` and
        their opposites. A text value compared with a numeric column is read
        as a number. So ``fold == 1`` and ``fold < 3`` work on CSV columns,
        which are read as text.
        """
        import pyarrow as pa
        import pyarrow.compute as pc

        def is_text(column):
            typ = schema.field(column).type
            if pa.types.is_dictionary(typ):
                typ = typ.value_type
            return pa.types.is_string(typ) or pa.types.is_large_string(typ)

        def text_number(column):
            """The text column read as float64, null where it is not a number."""
            trimmed = pc.utf8_trim_whitespace(pc.field(column).cast(pa.string()))
            number = pc.match_substring_regex(trimmed, _NUMBER_TEXT)
            return pc.if_else(number, trimmed, pa.scalar(None, pa.string())).cast(pa.float64())

        def text_matches(column, values):
            """True where a text column holds one of the numbers or booleans ``values``."""
            out = None
            numbers = [float(v) for v in values if not isinstance(v, bool)]
            flags = [v for v in values if isinstance(v, bool)]
            if numbers:
                out = pc.is_in(text_number(column), value_set=pa.array(numbers, pa.float64()))
            if flags:
                texts = [t for t, b in BOOL_TEXT.items() if b in flags]
                hit = pc.is_in(pc.utf8_trim_whitespace(pc.field(column).cast(pa.string())),
                               value_set=pa.array(texts, pa.string()))
                out = hit if out is None else (out | hit)
            return pc.coalesce(out, pa.scalar(False))

        def literal(column, value):
            typ = schema.field(column).type
            if pa.types.is_dictionary(typ):
                typ = typ.value_type
            if isinstance(value, str) and (pa.types.is_integer(typ) or pa.types.is_floating(typ)):
                try:
                    return int(value) if pa.types.is_integer(typ) else float(value)
                except ValueError:
                    raise InvalidInputError(
                        f"`where`: column {column!r} holds numbers; cannot compare it "
                        f"with {value!r}") from None
            return value

        self.check_columns(schema.names)

        def build(node):
            kind = node[0]
            if kind == "cmp" and is_text(node[1]) and not isinstance(node[3], str):
                _, col, op, value = node
                if op in ("==", "!="):
                    hit = text_matches(col, [value])
                    return hit if op == "==" else (pc.is_valid(pc.field(col)) & ~hit)
                f = pc.utf8_trim_whitespace(pc.field(col).cast(pa.string())).cast(pa.float64())
                v = float(value)
                return {"<": f < v, "<=": f <= v, ">": f > v, ">=": f >= v}[op]
            if kind == "in" and is_text(node[1]) and not all(isinstance(v, str) for v in node[2]):
                _, col, values = node
                words = [v for v in values if isinstance(v, str)]
                hit = text_matches(col, [v for v in values if not isinstance(v, str)])
                return (hit | pc.field(col).isin(words)) if words else hit
            if kind == "cmp":
                _, col, op, value = node
                f, v = pc.field(col), literal(col, value)
                return {"==": f == v, "!=": f != v, "<": f < v, "<=": f <= v,
                        ">": f > v, ">=": f >= v}[op]
            if kind == "in":
                _, col, values = node
                return pc.field(col).isin([literal(col, v) for v in values])
            if kind == "not":
                return ~build(node[1])
            parts = [build(child) for child in node[1:]]
            while len(parts) > 1:  # a balanced tree: shallow whatever the count
                pairs = [(parts[i], parts[i + 1]) for i in range(0, len(parts) - 1, 2)]
                joined = [(a & b) if kind == "and" else (a | b) for a, b in pairs]
                parts = joined + parts[len(pairs) * 2:]
            return parts[0]

        return build(self.tree)


@dataclass(frozen=True)
class ExpressionWhere:
    """A row filter given as a ``pyarrow.compute.Expression`` (the Python API).

    It stands where a :class:`Where` stands; the columns it reads are found
    once a table's schema is known (:meth:`bind`).

    Attributes
    ----------
    expr : pyarrow.compute.Expression
        The filter.
    columns : tuple of str
        Columns it reads (empty until bound).
    """

    expr: object
    columns: tuple = ()

    @property
    def text(self) -> str:
        """The expression as pyarrow prints it."""
        return str(self.expr)

    def bind(self, schema) -> ExpressionWhere:
        """The filter with the columns of ``schema`` it reads.

        Examples
        --------
        >>> import pyarrow as pa, pyarrow.compute as pc
        >>> w = ExpressionWhere(pc.field("split") == "test")
        >>> w.bind(pa.schema([("actual", pa.string()), ("split", pa.string())])).columns
        ('split',)
        """
        import pyarrow as pa

        def binds(fields) -> bool:
            try:
                pa.schema(fields).empty_table().filter(self.expr)
                return True
            except (pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError,
                    TypeError, KeyError):
                return False

        fields = list(schema)
        if not binds(fields):
            raise InvalidInputError(f"`where` {self.text!r} does not apply to a table with "
                                    f"columns {list(schema.names)!r}")
        used = tuple(f.name for f in fields if not binds([g for g in fields if g is not f]))
        return ExpressionWhere(self.expr, used)

    def check_columns(self, names) -> None:
        """Raise when the filter reads a column not among ``names``."""
        for column in self.columns:
            if column not in names:
                raise InvalidInputError(
                    f"`where` names column {column!r}, which the table does not have; "
                    f"it has {list(names)!r}")

    def expression(self, schema):
        """The expression itself."""
        return self.expr


def as_where(where):
    """A row filter from what a caller gives: None, filter text, a Where or an Arrow expression.

    Examples
    --------
    >>> as_where('split == "test"').columns
    ['split']
    >>> as_where(None) is None
    True
    """
    if where is None or isinstance(where, (Where, ExpressionWhere)):
        return where
    if isinstance(where, str):
        return parse_where(where)
    if type(where).__module__.startswith("pyarrow") and type(where).__name__ == "Expression":
        return ExpressionWhere(where)
    raise InvalidInputError(f"`where` must be filter text or a pyarrow.compute.Expression; "
                            f"got {type(where).__name__!r}")


def parse_where(text: str) -> Where:
    """Parse a row filter written in foldcorr's small filter syntax.

    Grammar (no code is ever evaluated)::

        filter  := either ("or" either)*
        either  := single ("and" single)*
        single  := "not" single | "(" filter ")" | column op value
                 | column "in" "(" value ("," value)* ")"
        op      := == | != | < | <= | > | >=
        value   := "text" | 'text' | number | true | false
        column  := a name of letters, digits, _ and . ; or any name in `backticks`

    Parameters
    ----------
    text : str
        The filter, e.g. ``'split == "test" and fold != 3'``.

    Returns
    -------
    Where

    Raises
    ------
    InvalidInputError
        On a syntax error, naming the position; when the filter nests deeper
        than :data:`MAX_DEPTH`, holds more than :data:`MAX_TERMS` comparisons
        or is longer than :data:`MAX_TEXT` characters.

    Examples
    --------
    >>> parse_where('split == "test" and fold in (1, 2)').tree
    ('and', ('cmp', 'split', '==', 'test'), ('in', 'fold', (1, 2)))
    >>> parse_where('split = "test"')
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: `where`: cannot read 'split = "test"' at position 6 ('= "test"'); ...
    """
    if len(text) > MAX_TEXT:
        raise InvalidInputError(f"`where` is {len(text):,} characters long; at most "
                                f"{MAX_TEXT:,} are read")
    tokens = _tokenize(text)
    if not tokens:
        raise InvalidInputError("`where` is empty; expected e.g. split == \"test\"")
    return Where(text=text, tree=_Parser(text, tokens).parse())


class _Parser:
    """An operator-precedence parser with explicit stacks: no recursion, bounded nesting."""

    PRECEDENCE = {"or": 1, "and": 2, "not": 3}

    def __init__(self, text: str, tokens: list):
        self.text, self.tokens, self.pos = text, tokens, 0

    def error(self, at: int, what: str) -> InvalidInputError:
        where = self.tokens[at][1] if at < len(self.tokens) else len(self.text)
        rest = self.text[where:].strip()
        return InvalidInputError(
            f"`where`: cannot read {self.text!r} at position {where} ({rest!r}); {what}. "
            f"Expected comparisons like column == \"value\" or column in (1, 2), "
            f"joined by and / or / not")

    def peek(self):
        return self.tokens[self.pos][0] if self.pos < len(self.tokens) else None

    def take(self):
        self.pos += 1
        return self.tokens[self.pos - 1][0]

    def value(self):
        if self.pos >= len(self.tokens):
            raise self.error(self.pos, "a value is missing")
        kind, val = self.take()
        if kind in ("str", "num"):
            return val
        if kind == "name" and val in ("true", "false"):
            return val == "true"
        raise self.error(self.pos - 1,
                         "expected a value (text in quotes, a number, true or false)")

    def comparison(self):
        column = self.take()[1]
        if self.peek() == ("name", "in"):
            self.take()
            if self.peek() != ("op", "("):
                raise self.error(self.pos, "expected ( after in")
            self.take()
            values = [self.value()]
            while self.peek() == ("op", ","):
                self.take()
                values.append(self.value())
            if self.peek() != ("op", ")"):
                raise self.error(self.pos, "a closing parenthesis is missing")
            self.take()
            return ("in", column, tuple(values))
        op = self.peek()
        if op is None or op[0] != "op" or op[1] not in _COMPARE:
            raise self.error(self.pos, "expected a comparison (==, !=, <, <=, >, >=) or in")
        self.take()
        return ("cmp", column, op[1], self.value())

    def parse(self) -> tuple:
        out: list = []
        ops: list = []
        operand, terms = True, 0
        while self.pos < len(self.tokens):
            tok = self.peek()
            if operand:
                if tok in (("name", "not"), ("op", "(")):
                    ops.append(self.take()[1])
                    if sum(o in ("(", "not") for o in ops) > MAX_DEPTH:
                        raise InvalidInputError(
                            f"`where` nests deeper than {MAX_DEPTH} levels of parentheses and "
                            f"not; write the filter flatter")
                    continue
                if tok[0] != "name":
                    raise self.error(self.pos, "expected a column name")
                out.append(self.comparison())
                terms += 1
                if terms > MAX_TERMS:
                    raise InvalidInputError(f"`where` has more than {MAX_TERMS} comparisons; "
                                            f"use column in (...) for long lists of values")
                operand = False
            elif tok in (("name", "and"), ("name", "or")):
                while ops and ops[-1] != "(" and \
                        self.PRECEDENCE[ops[-1]] >= self.PRECEDENCE[tok[1]]:
                    _reduce(ops, out)
                ops.append(self.take()[1])
                operand = True
            elif tok == ("op", ")") and "(" in ops:
                while ops[-1] != "(":
                    _reduce(ops, out)
                ops.pop()
                self.take()
            else:
                raise self.error(self.pos, "unexpected text after the filter")
        if operand:
            raise self.error(self.pos, "expected a column name")
        while ops:
            if ops[-1] == "(":
                raise self.error(self.pos, "a closing parenthesis is missing")
            _reduce(ops, out)
        return out[0]


def _reduce(ops: list, out: list) -> None:
    """Apply the operator on top of ``ops`` to the operands on top of ``out``."""
    op = ops.pop()
    if op == "not":
        out.append(("not", out.pop()))
        return
    b, a = out.pop(), out.pop()
    out.append(a + (b,) if a[0] == op else (op, a, b))


def _tokenize(text: str) -> list:
    tokens, pos = [], 0
    while pos < len(text):
        if text[pos:].strip() == "":
            break
        m = _TOKEN.match(text, pos)
        if not m or m.end() == pos:
            start = pos + len(text[pos:]) - len(text[pos:].lstrip())
            rest = text[start:]
            raise InvalidInputError(
                f"`where`: cannot read {text!r} at position {start} ({rest!r}); unknown symbol. "
                f"Expected comparisons like column == \"value\" or column in (1, 2), "
                f"joined by and / or / not")
        start = m.start(m.lastgroup)
        raw = m.group(m.lastgroup)
        if m.lastgroup == "str":
            val = re.sub(r"\\(.)", r"\1", raw[1:-1])
        elif m.lastgroup == "num":
            val = float(raw) if any(ch in raw for ch in ".eE") else int(raw)
        elif m.lastgroup == "name" and raw.startswith("`"):
            val = raw[1:-1]
        else:
            val = raw
        tokens.append(((m.lastgroup, val), start))
        pos = m.end()
    return tokens

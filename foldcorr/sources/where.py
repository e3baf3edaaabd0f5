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

__all__ = ["Where", "parse_where"]

#: A decimal number written as text (after trimming), as a filter reads one.
_NUMBER_TEXT = r"^[+-]?([0-9]+\.?[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?$"

_TOKEN = re.compile(r"""\s*(?:
    (?P<str>"(?:[^"\\]|\\.)*"|'(?:[^'\\]|\\.)*')
  | (?P<num>[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)
  | (?P<op>==|!=|<=|>=|<|>|\(|\)|,)
  | (?P<name>[A-Za-z_][A-Za-z0-9_.]*|`[^`]+`)
)""", re.VERBOSE)

_COMPARE = ("==", "!=", "<", "<=", ">", ">=")


@dataclass(frozen=True)
class Where:
    """A parsed row filter: a tree of comparisons joined by ``and``/``or``/``not``.

    Attributes
    ----------
    text : str
        The filter as written.
    tree : tuple
        ``("cmp", column, op, value)``, ``("in", column, values)``,
        ``("not", node)``, ``("and", a, b)`` or ``("or", a, b)``.
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
            a, b = build(node[1]), build(node[2])
            return (a & b) if kind == "and" else (a | b)

        return build(self.tree)


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
        On a syntax error, naming the position.

    Examples
    --------
    >>> parse_where('split == "test" and fold in (1, 2)').tree
    ('and', ('cmp', 'split', '==', 'test'), ('in', 'fold', (1, 2)))
    >>> parse_where('split = "test"')
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: `where`: cannot read 'split = "test"' at position 6 ('= "test"'); ...
    """
    tokens = _tokenize(text)
    pos = 0

    def error(at: int, what: str):
        where = tokens[at][1] if at < len(tokens) else len(text)
        rest = text[where:].strip()
        return InvalidInputError(
            f"`where`: cannot read {text!r} at position {where} ({rest!r}); {what}. "
            f"Expected comparisons like column == \"value\" or column in (1, 2), "
            f"joined by and / or / not")

    def peek(k=0):
        return tokens[pos + k][0] if pos + k < len(tokens) else None

    def take():
        nonlocal pos
        tok = tokens[pos]
        pos += 1
        return tok

    def value():
        if pos >= len(tokens):
            raise error(pos, "a value is missing")
        kind, val = take()[0]
        if kind in ("str", "num"):
            return val
        if kind == "name" and val in ("true", "false"):
            return val == "true"
        raise error(pos - 1, "expected a value (text in quotes, a number, true or false)")

    def single():
        tok = peek()
        if tok == ("name", "not"):
            take()
            return ("not", single())
        if tok == ("op", "("):
            take()
            node = disjunction()
            if peek() != ("op", ")"):
                raise error(pos, "a closing parenthesis is missing")
            take()
            return node
        if tok is None or tok[0] != "name":
            raise error(pos, "expected a column name")
        column = take()[0][1]
        if peek() == ("name", "in"):
            take()
            if peek() != ("op", "("):
                raise error(pos, "expected ( after in")
            take()
            values = [value()]
            while peek() == ("op", ","):
                take()
                values.append(value())
            if peek() != ("op", ")"):
                raise error(pos, "a closing parenthesis is missing")
            take()
            return ("in", column, tuple(values))
        op = peek()
        if op is None or op[0] != "op" or op[1] not in _COMPARE:
            raise error(pos, "expected a comparison (==, !=, <, <=, >, >=) or in")
        take()
        return ("cmp", column, op[1], value())

    def conjunction():
        node = single()
        while peek() == ("name", "and"):
            take()
            node = ("and", node, single())
        return node

    def disjunction():
        node = conjunction()
        while peek() == ("name", "or"):
            take()
            node = ("or", node, conjunction())
        return node

    if not tokens:
        raise InvalidInputError("`where` is empty; expected e.g. split == \"test\"")
    tree = disjunction()
    if pos != len(tokens):
        raise error(pos, "unexpected text after the filter")
    return Where(text=text, tree=tree)


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

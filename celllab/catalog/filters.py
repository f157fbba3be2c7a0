"""The catalog's filter language: tokenizer, recursive-descent parser, AST and SQL compiler.

Grammar (keywords are case-insensitive)::

    filter     := or_expr | <empty>
    or_expr    := and_expr ("or" and_expr)*
    and_expr   := not_expr ("and" not_expr)*
    not_expr   := "not" not_expr | "(" or_expr ")" | condition
    condition  := NUMERIC op (number | NUMERIC)        op: = == != <> < <= > >=
                | NUMERIC ["not"] "in" "(" number ("," number)* ")"
                | TEXT ("=" | "==" | "!=" | "<>" | "~") text      ~ is a glob: * ? [abc]
                | TEXT ["not"] "in" "(" text ("," text)* ")"
                | BOOL [("=" | "!=") ("true" | "false" | "yes" | "no" | 0 | 1)]
                                                                 a bare BOOL means true
    number     := ["-"] digits [. digits] [e [+-] digits]          plain floats, no SI suffix
    text       := "quoted" | 'quoted' | bare_word

Names come only from ``FIELDS`` (the catalog row columns); values are always bound as SQL
parameters. Errors are ``FilterSyntaxError`` (a ``FilterError``) with the expression, a caret
under the offending place, what was expected and, for unknown names, the closest allowed names.
"""

from __future__ import annotations

import re
import textwrap
from dataclasses import dataclass
from typing import Any, Literal, get_args

from celllab.columns import CELL_COLUMNS, CORNER_COLUMNS, METRICS, TEXT_COLUMNS
from celllab.errors import FilterError, Problem, did_you_mean

FieldKind = Literal["number", "text", "bool"]

def __getattr__(name: str) -> Any:
    # OXIDES (the closed set of the cell model) is read from the cell model on first use, so
    # parsing and compiling filters does not load the topologies (and their physics).
    if name == "OXIDES":
        from celllab.cells.schema import OxideChoice

        return tuple(get_args(OxideChoice))
    raise AttributeError(name)


def closed_values() -> dict[str, tuple[str, ...]]:
    """Text columns with a closed set of values (topologies read from the registry now)."""
    from celllab.topologies import REGISTRY
    from celllab.topologies.geometry import PLACEMENTS

    return {"topology": REGISTRY.names(), "oxide": __getattr__("OXIDES"), "placement": PLACEMENTS}

TEXT_FIELDS: tuple[str, ...] = tuple(TEXT_COLUMNS)
#: Corner conditions (NULL in worst/best rows, where no single corner applies).
CORNER_FIELDS: dict[str, str] = {n: c.unit for n, c in CORNER_COLUMNS.items()}

#: Every name a filter or a ranking may use, with its kind.
FIELDS: dict[str, FieldKind] = {
    **{c.name: c.kind for c in (*TEXT_COLUMNS.values(), *METRICS, *CELL_COLUMNS.values(),
                                *CORNER_COLUMNS.values())},
}

#: Limits of one filter (in ``describe_language``). They keep parsing iterative enough for
#: Python's stack and the compiled SQL inside SQLite's limits on expression depth and bound
#: parameters, so a filter is refused by name here and never fails inside SQLite.
MAX_NESTING = 50
MAX_CONDITIONS = 200
MAX_VALUES = 500
MAX_FILTER_CHARS = 10000

_KEYWORDS = {"and", "or", "not", "in", "true", "false"}
_COMPARE_OPS = {
    "=": "=",
    "==": "=",
    "!=": "!=",
    "<>": "!=",
    "<": "<",
    "<=": "<=",
    ">": ">",
    ">=": ">=",
    "~": "~",
}


# --------------------------------------------------------------------------- AST


@dataclass(frozen=True)
class FieldRef:
    """A numeric column used as the right-hand side of a comparison."""

    name: str


Value = float | str | FieldRef


@dataclass(frozen=True)
class Compare:
    """``field op value``; op is one of = != < <= > >= ~ (~ is a glob on text)."""

    field: str
    op: str
    value: Value


@dataclass(frozen=True)
class InSet:
    field: str
    values: tuple[float | str, ...]
    negated: bool = False


@dataclass(frozen=True)
class IsTrue:
    """A bare boolean column: ``esd_safe``."""

    field: str


@dataclass(frozen=True)
class Not:
    operand: Node


@dataclass(frozen=True)
class And:
    operands: tuple[Node, ...]


@dataclass(frozen=True)
class Or:
    operands: tuple[Node, ...]


@dataclass(frozen=True)
class Everything:
    """The empty filter: every row."""


Node = Compare | InSet | IsTrue | Not | And | Or | Everything


class FilterSyntaxError(FilterError):
    """A FilterError that also carries the expression and the 0-based position of the problem."""

    expression: str = ""
    position: int = 0


# --------------------------------------------------------------------------- tokens


@dataclass(frozen=True)
class Token:
    kind: str  # word number string op lparen rparen comma minus end
    text: str
    pos: int
    value: float | str | None = None

    def describe(self) -> str:
        if self.kind == "end":
            return "the end of the filter"
        if self.kind == "number":
            return f"the number {self.text}"
        if self.kind == "string":
            return f"the text {self.text}"
        if self.kind == "word":
            return f"'{self.text}'"
        return f"'{self.text}'"


_NUMBER_RE = re.compile(r"(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_WORD_START = re.compile(r"[A-Za-z_*?]")
_WORD_RE = re.compile(r"[A-Za-z_*?][A-Za-z0-9_.*?]*")
_OPS = ("==", "!=", "<>", "<=", ">=", "=", "<", ">", "~")


def _display(text: str) -> str:
    return text.replace("\n", " ").replace("\t", " ").replace("\r", " ")


def _error(
    text: str, pos: int, length: int, message: str, extra: tuple[str, ...] = ()
) -> FilterSyntaxError:
    shown = _display(text)
    caret = " " * pos + "^" * max(1, length)
    lines = [f"column {pos + 1}: {message}", f"  {shown}", f"  {caret}"]
    lines += [f"  {line}" for line in extra]
    err = FilterSyntaxError([Problem("filter", "", "\n".join(lines), has_value=False)])
    err.expression = text
    err.position = pos
    return err


def tokenize(text: str) -> list[Token]:
    """Split filter text into tokens; a bad character or unclosed quote is a FilterSyntaxError."""
    tokens: list[Token] = []
    i, n = 0, len(text)
    while i < n:
        ch = text[i]
        if ch.isspace():
            i += 1
            continue
        if ch in "\"'":
            j, buf = i + 1, []
            while j < n and text[j] != ch:
                if text[j] == "\\" and j + 1 < n:
                    j += 1
                buf.append(text[j])
                j += 1
            if j >= n:
                raise _error(text, i, n - i, f"unclosed quote {ch}", (f"close the text with {ch}",))
            tokens.append(Token("string", text[i : j + 1], i, "".join(buf)))
            i = j + 1
            continue
        if m := _NUMBER_RE.match(text, i):
            end = m.end()
            if end < n and (text[end].isalpha() or text[end] == "_"):
                w = _WORD_RE.match(text, end)
                stop = w.end() if w else end + 1
                raise _error(
                    text,
                    i,
                    stop - i,
                    f"'{text[i:stop]}' is not a plain number",
                    (
                        (
                            "units are part of the metric names: write plain numbers such as "
                            "5, 0.25 or 2e3 (no SI suffixes)"
                        ),
                    ),
                )
            tokens.append(Token("number", m.group(), i, float(m.group())))
            i = end
            continue
        if _WORD_START.match(ch):
            w = _WORD_RE.match(text, i)
            assert w is not None
            tokens.append(Token("word", w.group(), i, w.group()))
            i = w.end()
            continue
        op = next((o for o in _OPS if text.startswith(o, i)), None)
        if op is not None:
            tokens.append(Token("op", op, i))
            i += len(op)
            continue
        single = {"(": "lparen", ")": "rparen", ",": "comma", "-": "minus"}
        if ch in single:
            tokens.append(Token(single[ch], ch, i))
            i += 1
            continue
        raise _error(
            text,
            i,
            1,
            f"unexpected character {ch!r}",
            (
                (
                    "filters use names, numbers, quoted text, ( ) , and the operators "
                    "= != < <= > >= ~ in and or not"
                ),
            ),
        )
    tokens.append(Token("end", "", n))
    return tokens


# --------------------------------------------------------------------------- parser


def _allowed_lines(names: list[str], label: str = "allowed names") -> tuple[str, ...]:
    return tuple(
        textwrap.wrap(
            ", ".join(names),
            width=96,
            initial_indent=f"{label}: ",
            subsequent_indent="  ",
            break_on_hyphens=False,
        )
    )


def resolve_field(name: str) -> str | None:
    """The known field spelled ``name`` (exactly, or case-insensitively if unambiguous)."""
    if name in FIELDS:
        return name
    folded = [f for f in FIELDS if f.lower() == name.lower()]
    return folded[0] if len(folded) == 1 else None


def unknown_name_error(
    text: str, pos: int, name: str, kinds: tuple[FieldKind, ...] | None = None, what: str = "name"
) -> FilterSyntaxError:
    """FilterSyntaxError for an unknown column, with difflib suggestions and the allowed list."""
    allowed = [f for f, k in FIELDS.items() if kinds is None or k in kinds]
    hint = did_you_mean(name, allowed, n=3, fold_case=True)
    return _error(text, pos, len(name), f"unknown {what} '{name}'{hint}", _allowed_lines(allowed))


class _Parser:
    def __init__(self, text: str) -> None:
        if len(text) > MAX_FILTER_CHARS:
            raise _error(text[:60] + "...", 0, 1, f"the filter is {len(text)} characters long; at "
                         f"most {MAX_FILTER_CHARS}")
        self.text = text
        self.tokens = tokenize(text)
        self.i = 0
        self.depth = 0
        self.conditions = 0
        self.values = 0

    def enter(self, tok: Token) -> None:
        """One more level of parentheses or 'not' (refused past MAX_NESTING)."""
        self.depth += 1
        if self.depth > MAX_NESTING:
            raise _error(self.text, tok.pos, len(tok.text), f"nested more than {MAX_NESTING} deep "
                         f"(parentheses and 'not'); at most {MAX_NESTING} levels",
                         ("write the condition with fewer parentheses, or 'not' once",))

    def counted(self, node: Node, tok: Token) -> Node:
        self.conditions += 1
        if self.conditions > MAX_CONDITIONS:
            raise _error(self.text, tok.pos, len(tok.text),
                         f"more than {MAX_CONDITIONS} conditions; at most {MAX_CONDITIONS}",
                         ("list values with 'in (...)', or split the query",))
        return node

    # helpers
    @property
    def tok(self) -> Token:
        return self.tokens[self.i]

    def next(self) -> Token:
        t = self.tokens[self.i]
        self.i += 1
        return t

    def is_keyword(self, word: str, offset: int = 0) -> bool:
        t = self.tokens[min(self.i + offset, len(self.tokens) - 1)]
        return t.kind == "word" and t.text.lower() == word

    def fail(
        self, expected: str, tok: Token | None = None, extra: tuple[str, ...] = ()
    ) -> FilterSyntaxError:
        tok = tok or self.tok
        return _error(
            self.text, tok.pos, len(tok.text), f"expected {expected}, found {tok.describe()}", extra
        )

    # grammar
    def parse(self) -> Node:
        if self.tok.kind == "end":
            return Everything()
        node = self.or_expr()
        if self.tok.kind != "end":
            if self.tok.kind == "rparen":
                raise self.fail("'and', 'or' or the end of the filter (this ')' closes nothing)")
            raise self.fail(
                "'and', 'or' or the end of the filter", extra=("join conditions with 'and' / 'or'",)
            )
        return node

    def or_expr(self) -> Node:
        items = [self.and_expr()]
        while self.is_keyword("or"):
            self.next()
            items.append(self.and_expr())
        return items[0] if len(items) == 1 else Or(tuple(items))

    def and_expr(self) -> Node:
        items = [self.not_expr()]
        while self.is_keyword("and"):
            self.next()
            items.append(self.not_expr())
        return items[0] if len(items) == 1 else And(tuple(items))

    def not_expr(self) -> Node:
        if self.is_keyword("not"):
            self.enter(self.next())
            node: Node = Not(self.not_expr())
            self.depth -= 1
            return node
        if self.tok.kind == "lparen":
            opening = self.next()
            self.enter(opening)
            node = self.or_expr()
            if self.tok.kind != "rparen":
                raise self.fail("')'", extra=(f"to close the '(' at column {opening.pos + 1}",))
            self.next()
            self.depth -= 1
            return node
        tok = self.tok
        return self.counted(self.condition(), tok)

    def condition(self) -> Node:
        tok = self.tok
        if tok.kind != "word" or tok.text.lower() in _KEYWORDS:
            extra: tuple[str, ...] = ()
            if tok.kind in ("number", "minus"):
                extra = ("put the column first, e.g. cap_fF >= 5",)
            raise self.fail(
                "a column name (a metric such as cap_fF, or name/topology/oxide/...)", extra=extra
            )
        field = resolve_field(tok.text)
        if field is None:
            raise unknown_name_error(self.text, tok.pos, tok.text)
        self.next()
        kind = FIELDS[field]
        if self.is_keyword("in") or (self.is_keyword("not") and self.is_keyword("in", 1)):
            negated = self.is_keyword("not")
            self.i += 2 if negated else 1
            return InSet(field, self.value_list(field), negated)
        if kind == "bool":
            if self.tok.kind == "op" and self.tok.text in ("=", "==", "!=", "<>"):
                op = _COMPARE_OPS[self.next().text]
                value = self.bool_value(field)
                return Compare(field, op, value)
            return IsTrue(field)
        if self.tok.kind != "op":
            ops = "=, !=, ~, in, not in" if kind == "text" else "=, !=, <, <=, >, >=, in, not in"
            raise self.fail(f"an operator after '{tok.text}' ({ops})")
        op_tok = self.next()
        op = _COMPARE_OPS[op_tok.text]
        if kind == "text":
            if op not in ("=", "!=", "~"):
                raise _error(
                    self.text,
                    op_tok.pos,
                    len(op_tok.text),
                    f"'{op_tok.text}' does not apply to the text column '{field}'",
                    ("text columns take =, !=, ~ (glob), in, not in",),
                )
            return Compare(field, op, self.text_value(field, glob=op == "~"))
        if op == "~":
            raise _error(
                self.text,
                op_tok.pos,
                1,
                f"'~' (glob) applies to text columns, not '{field}'",
                ("numeric columns take =, !=, <, <=, >, >=, in, not in",),
            )
        return Compare(field, op, self.number_or_field(field))

    def number(self, field: str) -> float:
        sign = 1.0
        if self.tok.kind == "minus":
            self.next()
            sign = -1.0
        if self.tok.kind != "number":
            raise self.fail(f"a number for '{field}'")
        value = self.next().value
        assert isinstance(value, float)
        return sign * value

    def number_or_field(self, field: str) -> float | FieldRef:
        tok = self.tok
        if tok.kind == "word" and tok.text.lower() not in _KEYWORDS:
            other = resolve_field(tok.text)
            if other is not None and FIELDS[other] == "number":
                self.next()
                return FieldRef(other)
            if other is not None:
                raise self.fail(f"a number or a numeric column for '{field}'")
            raise unknown_name_error(self.text, tok.pos, tok.text, ("number",), "numeric column")
        if tok.kind not in ("number", "minus"):
            raise self.fail(f"a number for '{field}'")
        return self.number(field)

    def text_value(self, field: str, glob: bool = False) -> str:
        tok = self.tok
        if (
            tok.kind == "string"
            or tok.kind == "word"
            and tok.text.lower() not in ("and", "or", "not", "in")
        ):
            value = str(self.next().value)
        elif tok.kind == "number":
            raise self.fail(
                f"a word or quoted text for '{field}'", extra=(f'quote it: {field} = "{tok.text}"',)
            )
        else:
            raise self.fail(f"a word or quoted text for '{field}'")
        closed = closed_values()
        if not glob and field in closed and value not in closed[field]:
            allowed = list(closed[field])
            hint = did_you_mean(value, allowed, n=2, cutoff=0.5)
            raise _error(
                self.text,
                tok.pos,
                len(tok.text),
                f"'{value}' is not a {field}{hint}",
                _allowed_lines(allowed, "allowed"),
            )
        return value

    def bool_value(self, field: str) -> float:
        tok = self.tok
        # yes/no as well: tables and the UI show booleans that way
        if self.is_keyword("true") or self.is_keyword("yes") or (
                tok.kind == "number" and tok.value == 1.0):
            self.next()
            return 1.0
        if self.is_keyword("false") or self.is_keyword("no") or (
                tok.kind == "number" and tok.value == 0.0):
            self.next()
            return 0.0
        raise self.fail(f"true, false, yes, no, 1 or 0 for '{field}'")

    def value_list(self, field: str) -> tuple[float | str, ...]:
        kind = FIELDS[field]
        if self.tok.kind != "lparen":
            raise self.fail(f"'(' to open the list of values for '{field}'")
        self.next()
        values: list[float | str] = []
        while True:
            self.values += 1
            if self.values > MAX_VALUES:
                raise _error(self.text, self.tok.pos, len(self.tok.text),
                             f"more than {MAX_VALUES} listed values; at most {MAX_VALUES}")
            if kind == "text":
                values.append(self.text_value(field))
            elif kind == "bool":
                values.append(self.bool_value(field))
            else:
                values.append(self.number(field))
            if self.tok.kind == "comma":
                self.next()
                continue
            if self.tok.kind == "rparen":
                self.next()
                return tuple(values)
            raise self.fail("',' or ')' in the list of values")


def parse_filter(text: str) -> Node:
    """Parse filter text into an AST (``Everything`` for empty text); FilterSyntaxError if malformed."""
    return _Parser(text or "").parse()


# --------------------------------------------------------------------------- SQL


def quote_column(name: str) -> str:
    """The SQL identifier of a whitelisted column (anything else is a programming error)."""
    if name not in FIELDS:
        raise KeyError(name)
    return f'"{name}"'


def node_to_sql(node: Node, params: list[object]) -> str:
    """SQL text of ``node``, appending bound values to ``params`` (``?`` placeholders)."""
    if isinstance(node, Everything):
        return "1"
    if isinstance(node, Compare):
        col = quote_column(node.field)
        if isinstance(node.value, FieldRef):
            return f"({col} {node.op} {quote_column(node.value.name)})"
        params.append(node.value)
        return f"({col} GLOB ?)" if node.op == "~" else f"({col} {node.op} ?)"
    if isinstance(node, InSet):
        params.extend(node.values)
        marks = ", ".join("?" for _ in node.values)
        return f"({quote_column(node.field)} {'NOT IN' if node.negated else 'IN'} ({marks}))"
    if isinstance(node, IsTrue):
        params.append(1)
        return f"({quote_column(node.field)} = ?)"
    if isinstance(node, Not):
        return f"(NOT {node_to_sql(node.operand, params)})"
    if isinstance(node, (And, Or)):
        joiner = " AND " if isinstance(node, And) else " OR "
        return "(" + joiner.join(node_to_sql(n, params) for n in node.operands) + ")"
    raise TypeError(f"not a filter node: {node!r}")


def compile_filter(text: str) -> tuple[str, list[object]]:
    """Filter text -> (SQL condition over the catalog row columns, bound parameters)."""
    params: list[object] = []
    sql = node_to_sql(parse_filter(text), params)
    return sql, params


def fields_used(node: Node) -> set[str]:
    """Every column a filter refers to."""
    if isinstance(node, Compare):
        return {node.field} | ({node.value.name} if isinstance(node.value, FieldRef) else set())
    if isinstance(node, (InSet, IsTrue)):
        return {node.field}
    if isinstance(node, Not):
        return fields_used(node.operand)
    if isinstance(node, (And, Or)):
        return set().union(*(fields_used(n) for n in node.operands))
    return set()


def describe_language() -> str:
    """Plain-text help for the filter language, listing every name with its unit."""
    lines = [
        "Filter language (--where):",
        "  conditions   leakage_nA_per_nF <= 5   bandwidth_GHz >= 2   height_rows = 1   esd_safe",
        "               cap_fF > cap_ox_fF       topology in (cross_coupled, mom)   oxide = core",
        '               name ~ "ndcap*"  (glob: * ? [abc])   family != fam_a   not esd_safe',
        "  combine      and, or, not, parentheses: not (esr_ohm > 3 or srf_GHz < 2)",
        "  values       plain numbers (5, 0.25, 2e3, -40; no SI suffixes: units are in the names),",
        "               words or quoted text for name/deck/family/topology/oxide/corner",
        f"  limits       at most {MAX_NESTING} levels of parentheses and 'not', {MAX_CONDITIONS} "
        f"conditions,",
        f"               {MAX_VALUES} listed values and {MAX_FILTER_CHARS} characters",
        "  corners      with --corner worst (default) each metric is its least favourable value",
        "               over the corners (best: most favourable) before the filter applies;",
        "               temperature_C and supply_V are empty there; a *_is_bound flag is that of",
        "               the corner giving its metric's value",
        "  bounds       srf_is_bound, bandwidth_is_bound: the value is only a lower bound (shown",
        "               as ≥value); e.g. srf_GHz >= 50 and not srf_is_bound",
        "Metrics (per corner; better = direction of ranking by default):",
    ]
    width = max(len(n) for n in FIELDS)
    for m in METRICS:
        lines.append(f"  {m.name:<{width}}  [{m.unit}] {m.better} is better; {m.description}")
    lines.append("Cell columns:")
    for c in CELL_COLUMNS.values():
        unit = f"[{c.unit}]" if c.kind != "text" else "[text]"
        lines.append(f"  {c.name:<{width}}  {unit} {c.description}")
    for c in CORNER_COLUMNS.values():
        lines.append(f"  {c.name:<{width}}  [{c.unit}] corner condition")
    lines.append(f"Text columns: {', '.join(TEXT_FIELDS)}")
    closed = closed_values()
    lines.append(
        f"  topology: {', '.join(closed['topology'])};  oxide: {', '.join(closed['oxide'])}"
    )
    lines.append(
        f"  placement: {', '.join(closed['placement'])};  rail: core, io or a deck's named rail"
    )
    return "\n".join(lines)

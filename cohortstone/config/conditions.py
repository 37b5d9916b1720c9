"""The `population` grammar: tokenize, parse to a small tree, evaluate over a DataFrame.

Grammar (nothing is ever evaluated as Python code)::

    condition  := either ("or" either)*          -- lowest precedence
    either     := negated ("and" negated)*
    negated    := "not" negated | "(" condition ")" | test
    test       := COLUMN OP LITERAL | COLUMN ["not"] "in" "[" LITERAL ("," LITERAL)* "]"
                | COLUMN "is" ["not"] "missing"
    OP         := == | != | < | <= | > | >=
    LITERAL    := number | 'text' | "text" | true | false

Missing values follow three-valued logic (as in SQL): a comparison with a missing value is
unknown, and a row belongs to the population only when every condition is known to hold.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Union

import numpy as np
import pandas as pd

from cohortstone.errors import DataError

_TOKEN = re.compile(
    r"""\s*(?:
      (?P<number>-?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?)
    | (?P<string>'[^']*'|"[^"]*")
    | (?P<op>==|!=|<=|>=|<|>)
    | (?P<punct>[\[\](),])
    | (?P<word>[A-Za-z_][A-Za-z0-9_]*)
    )""",
    re.VERBOSE,
)
_KEYWORDS = {"and", "or", "not", "in", "is", "missing", "true", "false"}


class ConditionSyntaxError(ValueError):
    """A condition that does not follow the grammar; the message points at the spot."""


@dataclass(frozen=True)
class Test:
    column: str
    op: str  # one of the comparison ops, "in", "not in", "is missing", "is not missing"
    value: object = None


@dataclass(frozen=True)
class Not:
    operand: "Node"


@dataclass(frozen=True)
class Both:
    left: "Node"
    right: "Node"


@dataclass(frozen=True)
class Either:
    left: "Node"
    right: "Node"


Node = Union[Test, Not, Both, Either]


@dataclass(frozen=True)
class Condition:
    """One parsed population condition, keeping its source text for messages."""

    text: str
    tree: Node

    def columns(self) -> list[str]:
        return sorted(_columns(self.tree))


def _columns(node: Node) -> set[str]:
    if isinstance(node, Test):
        return {node.column}
    if isinstance(node, Not):
        return _columns(node.operand)
    return _columns(node.left) | _columns(node.right)


def _tokenize(text: str) -> list[tuple[str, str, int]]:
    tokens, pos = [], 0
    stripped = text.rstrip()
    while pos < len(stripped):
        match = _TOKEN.match(stripped, pos)
        if not match or match.end() == pos:
            bad = stripped[pos:].lstrip()[:1]
            col = len(stripped) - len(stripped[pos:].lstrip())
            raise ConditionSyntaxError(
                f"unexpected character {bad!r} at position {col + 1}; conditions use column "
                "names, comparisons (== != < <= > >=), numbers, quoted text, `in [...]`, "
                "`is missing`, `and`, `or`, `not` and parentheses"
            )
        kind = match.lastgroup
        value, start = match.group(kind), match.start(kind)
        if kind == "word" and value.lower() in _KEYWORDS:
            kind, value = "keyword", value.lower()
        tokens.append((kind, value, start))
        pos = match.end()
    tokens.append(("end", "", len(stripped)))
    return tokens


class _Parser:
    def __init__(self, text: str):
        self.text = text
        self.tokens = _tokenize(text)
        self.i = 0

    def peek(self) -> tuple[str, str, int]:
        return self.tokens[self.i]

    def take(self, kind: str, value: str | None = None) -> str:
        tok_kind, tok_value, pos = self.peek()
        if tok_kind != kind or (value is not None and tok_value != value):
            wanted = f"`{value}`" if value else kind
            found = f"`{tok_value}`" if tok_value else "the end of the condition"
            raise ConditionSyntaxError(f"expected {wanted} at position {pos + 1}, found {found}")
        self.i += 1
        return tok_value

    def at(self, kind: str, value: str | None = None) -> bool:
        tok_kind, tok_value, _ = self.peek()
        return tok_kind == kind and (value is None or tok_value == value)

    def parse(self) -> Node:
        node = self.condition()
        self.take("end")
        return node

    def condition(self) -> Node:
        node = self.either()
        while self.at("keyword", "or"):
            self.i += 1
            node = Either(node, self.either())
        return node

    def either(self) -> Node:
        node = self.negated()
        while self.at("keyword", "and"):
            self.i += 1
            node = Both(node, self.negated())
        return node

    def negated(self) -> Node:
        if self.at("keyword", "not"):
            self.i += 1
            return Not(self.negated())
        if self.at("punct", "("):
            self.i += 1
            node = self.condition()
            self.take("punct", ")")
            return node
        return self.test()

    def test(self) -> Test:
        column = self.take("word")
        if self.at("op"):
            op = self.take("op")
            return Test(column, op, self.literal())
        if self.at("keyword", "is"):
            self.i += 1
            negate = self.at("keyword", "not")
            if negate:
                self.i += 1
            self.take("keyword", "missing")
            return Test(column, "is not missing" if negate else "is missing")
        negate = self.at("keyword", "not")
        if negate:
            self.i += 1
        self.take("keyword", "in")
        self.take("punct", "[")
        values = [self.literal()]
        while self.at("punct", ","):
            self.i += 1
            values.append(self.literal())
        self.take("punct", "]")
        return Test(column, "not in" if negate else "in", tuple(values))

    def literal(self) -> object:
        kind, value, pos = self.peek()
        self.i += 1
        if kind == "number":
            number = float(value)
            return int(number) if number.is_integer() and "." not in value else number
        if kind == "string":
            return value[1:-1]
        if kind == "keyword" and value in ("true", "false"):
            return value == "true"
        found = f"`{value}`" if value else "the end of the condition"
        raise ConditionSyntaxError(
            f"expected a number or quoted text at position {pos + 1}, found {found}"
        )


def parse_condition(text: str) -> Condition:
    """Parse one condition; raises `ConditionSyntaxError` with the position of the fault."""
    if not isinstance(text, str) or not text.strip():
        raise ConditionSyntaxError("a condition must be non-empty text, e.g. `age_years >= 20`")
    return Condition(text=text, tree=_Parser(text).parse())


# ---- evaluation: Kleene three-valued logic as (holds, known) pairs -------------------------

_COMPARE = {
    "==": np.equal, "!=": np.not_equal, "<": np.less,
    "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal,
}


def _is_text(series: pd.Series) -> bool:
    return not (pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series))


def _check_type(series: pd.Series, value: object, cond: Condition, column: str) -> None:
    text_column, text_value = _is_text(series), isinstance(value, str)
    if text_column != text_value:
        kind = "text" if text_column else "numbers"
        raise DataError(
            f"population condition `{cond.text}`: column `{column}` holds {kind}, but it is "
            f"compared with {value!r}. Write " + ("quoted text, e.g. 'female'." if text_column
                                                  else "a number without quotes.")
        )


def _evaluate(node: Node, frame: pd.DataFrame, cond: Condition) -> tuple[np.ndarray, np.ndarray]:
    if isinstance(node, Not):
        holds, known = _evaluate(node.operand, frame, cond)
        return ~holds & known, known
    if isinstance(node, (Both, Either)):
        lh, lk = _evaluate(node.left, frame, cond)
        rh, rk = _evaluate(node.right, frame, cond)
        if isinstance(node, Both):
            false = (lk & ~lh) | (rk & ~rh)
            holds = lh & rh & lk & rk
            return holds, holds | false
        holds = (lh & lk) | (rh & rk)
        return holds, holds | (lk & rk)
    series = frame[node.column]
    missing = series.isna().to_numpy()
    if node.op == "is missing":
        return missing, np.ones(len(frame), bool)
    if node.op == "is not missing":
        return ~missing, np.ones(len(frame), bool)
    values = node.value if isinstance(node.value, tuple) else (node.value,)
    for value in values:
        _check_type(series, value, cond, node.column)
    known = ~missing
    filled = series.where(known, other="" if _is_text(series) else 0)
    data = filled.astype(str).to_numpy() if _is_text(series) else filled.to_numpy(dtype=float)
    if node.op in ("in", "not in"):
        holds = np.isin(data, np.array(values, dtype=object if _is_text(series) else float))
        if node.op == "not in":
            holds = ~holds
    else:
        holds = _COMPARE[node.op](data, node.value)
    return holds & known, known


def evaluate(cond: Condition, frame: pd.DataFrame) -> np.ndarray:
    """Boolean array: True where the condition is known to hold (missing -> False)."""
    holds, known = _evaluate(cond.tree, frame, cond)
    return np.asarray(holds & known, dtype=bool)

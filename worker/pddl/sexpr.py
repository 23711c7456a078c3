"""Read PDDL text into nested lists of symbols that remember their line and column.

Hand-written on purpose: PDDL is case-insensitive (every symbol is lowered
here), ``;`` starts a comment to the end of the line, and a symbol such as
``t`` or ``nil`` is just a symbol, never a boolean or an empty list.

Every error is a ``ProblemError`` on the text's field (``domain_text`` or
``problem_text``) with the 1-based ``line`` and ``column`` in the message and
in ``extra``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NoReturn, Union

from worker.exceptions import ProblemError

__all__ = ["Sym", "SList", "Node", "read", "fail", "where", "MAX_DEPTH"]


@dataclass(frozen=True, slots=True)
class Sym:
    """A symbol (name, variable, number, keyword), lower-cased."""

    text: str
    line: int
    col: int


@dataclass(frozen=True, slots=True)
class SList:
    """A parenthesised list; ``line``/``col`` locate its opening parenthesis."""

    items: tuple["Node", ...]
    line: int
    col: int

    def head(self) -> str | None:
        """Return the first item's text when it is a symbol, else None."""
        if self.items and isinstance(self.items[0], Sym):
            return self.items[0].text
        return None


Node = Union[Sym, SList]


def where(node: Node) -> str:
    """Return ``line L, column C`` of a node."""
    return f"line {node.line}, column {node.col}"


def fail(field: str, node: Node | tuple[int, int], message: str) -> NoReturn:
    """Raise a ProblemError on ``field`` located at ``node`` (or at a ``(line, col)`` pair)."""
    line, col = (node.line, node.col) if not isinstance(node, tuple) else node
    raise ProblemError(field, f"line {line}, column {col}: {message}", line=line, column=col)


_DELIMS = frozenset("();")
# Real domains nest a handful of levels; a cap keeps the recursive parsers far from Python's stack limit.
MAX_DEPTH = 64


def read(text: str, field: str) -> list[Node]:
    """Return the top-level nodes of ``text``; raise a located ProblemError on unbalanced input."""
    stack: list[tuple[int, int, list[Node]]] = []
    top: list[Node] = []
    out = top
    i, n = 0, len(text)
    line, line_start = 1, 0
    while i < n:
        ch = text[i]
        if ch == "\n":
            line += 1
            i += 1
            line_start = i
        elif ch.isspace():
            i += 1
        elif ch == ";":
            j = text.find("\n", i)
            i = n if j < 0 else j
        elif ch == "(":
            if len(stack) >= MAX_DEPTH:
                fail(field, (line, i - line_start + 1), f"lists nest deeper than {MAX_DEPTH} levels")
            stack.append((line, i - line_start + 1, out))
            out = []
            i += 1
        elif ch == ")":
            if not stack:
                fail(field, (line, i - line_start + 1), "unexpected ')' with no '(' open")
            l0, c0, parent = stack.pop()
            parent.append(SList(tuple(out), l0, c0))
            out = parent
            i += 1
        else:
            j = i
            while j < n and not text[j].isspace() and text[j] not in _DELIMS:
                j += 1
            out.append(Sym(text[i:j].lower(), line, i - line_start + 1))
            i = j
    if stack:
        l0, c0, _ = stack[-1]
        fail(field, (l0, c0), "this '(' is never closed")
    return top

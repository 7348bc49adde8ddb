"""The token-by-token Newick parser: the general path of the tree reader.

A small tokenizer turns text into tokens (punctuation, words, quoted labels, comments) and
:func:`parse_tree_tokens` builds one tree statement in postorder from them, reporting the first
problem with its offset. It takes every quirk listed in :mod:`atlas.sources.trees`; the batch
parser (:mod:`atlas.sources.trees_fast`) hands it every tree it does not take, so that all
problems are reported by one parser.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterator
from dataclasses import dataclass

from atlas.errors import did_you_mean

# One token after optional whitespace: 1 punctuation, 2 quoted label, 3 simple comment,
# 4 the start of a nested (or unterminated) comment, 5 a word, 6 anything else (a stray quote
# or bracket).
_TOKEN = re.compile(
    r"\s*(?:([(),:;=])|('(?:[^']|'')*')|(\[[^\[\]]*\])|(\[)|([^\s()\[\]',:;=]+)|(\S))"
)
NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?\Z")

Token = tuple[str, str, int]  # (kind, value, offset); kind: one of "(),:;=", "q", "c", "w", "x"


def _comment_end(text: str, start: int) -> int:
    """The offset just past the ``]`` closing the comment opened at ``start``, or -1."""
    depth = 1
    i = start + 1
    while True:
        close = text.find("]", i)
        if close < 0:
            return -1
        opening = text.find("[", i, close)
        if opening >= 0:
            depth += 1
            i = opening + 1
        else:
            depth -= 1
            i = close + 1
            if depth == 0:
                return i


class Lexer:
    """The tokens of a text as ``(kind, value, offset)``; an ``"x"`` token ends a broken text.

    An iterator whose position ``pos`` may be moved forward (the fast tree path reads a whole
    tree at once and then moves it past the tree).
    """

    def __init__(self, text: str):
        self.text = text
        self.pos = 0
        self._match = _TOKEN.match

    def __iter__(self) -> Lexer:
        return self

    def __next__(self) -> Token:
        text = self.text
        m = self._match(text, self.pos)
        if m is None:
            raise StopIteration
        self.pos = m.end()
        k = m.lastindex
        if k == 1:
            return m.group(1), "", m.start(1)
        if k == 5:
            return "w", m.group(5), m.start(5)
        if k == 3:
            return "c", m.group(3), m.start(3)
        if k == 2:
            return "q", m.group(2)[1:-1].replace("''", "'"), m.start(2)
        if k == 4:
            start = m.start(4)
            end = _comment_end(text, start)
            if end < 0:
                self.pos = len(text)
                return "x", "unterminated comment (no closing ']')", start
            self.pos = end
            return "c", text[start:end], start
        start = m.start(6)
        char = m.group(6)
        if char == "'":
            self.pos = len(text)
            return "x", "unterminated quoted label (no closing quote)", start
        return "x", f"unexpected {char!r}", start


class Bad(Exception):
    """A problem inside one statement: its offset and message (turned into a Problem)."""

    def __init__(self, pos: int, message: str, hint: str = "", *, at_end: bool = False):
        super().__init__(message)
        self.pos = pos
        self.message = message
        self.hint = hint
        self.at_end = at_end  # the statement's ';' (or the end of the text) is already read


@dataclass
class RawTree:
    """A parsed tree before its tips are mapped onto the sample's taxa."""

    pos: int
    parent: list[int]
    length: list[float]
    names: list[str | None]  # tip name (translated) or None for internal nodes
    labels: list[str | None]


class Namespace:
    """How tip tokens become taxon names: TRANSLATE keys, TAXLABELS numbers, or as written."""

    def __init__(self) -> None:
        self.translate: dict[str, str] = {}
        self.taxlabels: list[str] = []

    def name(self, token: str, pos: int) -> str:
        if not self.translate and not self.taxlabels:
            return token
        if token in self.translate:
            return self.translate[token]
        known = set(self.translate.values()) | set(self.taxlabels)
        if token in known:
            return token
        if not self.translate and token.isdigit() and 1 <= int(token) <= len(self.taxlabels):
            return self.taxlabels[int(token) - 1]
        what = "translate key" if self.translate else "taxon"
        hint = did_you_mean(token, list(self.translate) + sorted(known))
        raise Bad(pos, f"unknown {what} {token!r} in tree", hint)


def parse_tree_tokens(tokens: Iterator[Token], first: Token, names: Namespace) -> RawTree:
    """Build one tree in postorder from its tokens up to and including ``;``."""
    parent: list[int] = []
    length: list[float] = []
    tipname: list[str | None] = []
    label: list[str | None] = []
    stack: list[list[int]] = []
    seen: dict[str, int] = {}
    cur = -1  # the node just completed; -1 while a new node is expected
    has_length = False
    kind, value, pos = first
    start = pos
    while True:
        if kind == "c":
            pass
        elif kind == "(":
            if cur >= 0:
                raise Bad(pos, "unexpected '(' after a node (missing ',')")
            stack.append([])
        elif kind == "," or kind == ")":
            if cur < 0:
                raise Bad(pos, f"empty node before {kind!r} (a tip without a label)")
            if not stack:
                raise Bad(pos, f"unbalanced {kind!r}: no '(' is open")
            if kind == ",":
                stack[-1].append(cur)
                cur = -1
            else:
                kids = stack.pop()
                kids.append(cur)
                cur = len(parent)
                for c in kids:
                    parent[c] = cur
                parent.append(-1)
                length.append(math.nan)
                tipname.append(None)
                label.append(None)
            has_length = False
        elif kind == "w" or kind == "q":
            if cur < 0:
                name = names.name(value, pos)
                if name in seen:
                    raise Bad(pos, f"tip label {name!r} appears twice in this tree")
                seen[name] = pos
                cur = len(parent)
                parent.append(-1)
                length.append(math.nan)
                tipname.append(name)
                label.append(name)
            elif tipname[cur] is None and label[cur] is None and not has_length:
                label[cur] = value
            else:
                raise Bad(pos, f"unexpected label {value!r} (missing ',' or ')')")
        elif kind == ":":
            if cur < 0 or has_length:
                raise Bad(pos, "unexpected ':'")
            kind, value, pos = next(tokens, ("", "", -1))
            while kind == "c":
                kind, value, pos = next(tokens, ("", "", -1))
            if kind != "w" or not NUMBER.match(value):
                shown = value or kind or "end of file"
                raise Bad(
                    pos if pos >= 0 else start,
                    f"branch length {shown!r} is not a number",
                    at_end=kind in ("", ";"),
                )
            length[cur] = float(value)
            has_length = True
        elif kind == ";":
            if stack:
                raise Bad(
                    start, f"unbalanced parentheses: {len(stack)} '(' not closed", at_end=True
                )
            if cur < 0:
                raise Bad(pos, "empty tree", at_end=True)
            return RawTree(start, parent, length, tipname, label)
        elif kind == "x":
            raise Bad(pos, value, at_end=value.startswith("unterminated"))
        elif kind == "":
            if stack:
                raise Bad(
                    start,
                    f"truncated tree: {len(stack)} '(' not closed at end of file",
                    at_end=True,
                )
            raise Bad(start, "truncated tree: no ';' at its end", at_end=True)
        else:
            raise Bad(pos, f"unexpected {kind!r} in tree")
        kind, value, pos = next(tokens, ("", "", -1))


def skip_to_semicolon(tokens: Iterator[Token]) -> None:
    for kind, _, _ in tokens:
        if kind in ";x":
            return

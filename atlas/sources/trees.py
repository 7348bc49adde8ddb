"""Reading trees: Newick and NEXUS files, one tree or a posterior sample.

A small tokenizer of our own turns the text into tokens (punctuation, words, quoted labels,
comments) and a postorder builder turns each tree statement into a
:class:`~atlas.analysis.tree.Tree`.
What MCMC programs write is accepted as written:

- NEXUS ``TREES`` blocks with ``TRANSLATE`` (keys numbered from 0 or 1, or names), a ``TAXA``
  block (plain numbers in trees then refer to ``TAXLABELS`` from 1), ``TREE * name = ...``,
  ``tree STATE_0 [&lnP=...] = [&R] ...``; other blocks are skipped;
- quoted labels (``'it''s here'``), comments ``[...]`` anywhere (nested brackets allowed; the
  brackets decide where a comment ends, quotes inside it do not), ``[&R]`` / ``[&U]``;
- branch lengths in scientific notation, CRLF line ends, trees over several lines, no final
  newline.

Labels are kept as written: quotes are removed and ``''`` becomes ``'``, but underscores are
never turned into spaces. Tip labels of a sample are sorted into the shared ``taxa`` tuple.

Bad input raises :class:`~atlas.errors.AtlasError` listing every problem found, each with the
line of the tree or of the offending token.
"""

from __future__ import annotations

import bisect
import math
import re
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from atlas.analysis.tree import Tree, clade_masks
from atlas.errors import AtlasError, Problem, Problems, did_you_mean

# One token after optional whitespace: 1 punctuation, 2 quoted label, 3 simple comment,
# 4 the start of a nested (or unterminated) comment, 5 a word, 6 anything else (a stray quote
# or bracket).
_TOKEN = re.compile(
    r"\s*(?:([(),:;=])|('(?:[^']|'')*')|(\[[^\[\]]*\])|(\[)|([^\s()\[\]',:;=]+)|(\S))"
)
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?\Z")
_MAX_PROBLEMS = 50  # stop collecting after this many (a broken file would list thousands)

Token = tuple[str, str, int]  # (kind, value, offset); kind: one of "(),:;=", "q", "c", "w", "x"


@dataclass(frozen=True)
class TreeSample:
    """The trees of one file after burn-in and thinning, over one shared, sorted ``taxa``."""

    file: str
    taxa: tuple[str, ...]
    trees: list[Tree]
    read: int
    burnin: int
    thin: int

    def split_frequencies(self) -> dict[frozenset[str], float]:
        """Fraction of kept trees containing each non-trivial unrooted bipartition.

        A split is keyed by the tip labels on the side *without* ``taxa[0]`` (the alphabetically
        first label); non-trivial means both sides hold at least two taxa. Each tree counts a
        split once (the two children of a bifurcating root give the same split).

        >>> s = TreeSample("x", ("A", "B", "C", "D"),
        ...                [parse_newick("((A,B),(C,D));"), parse_newick("((A,C),(B,D));")],
        ...                2, 0, 1)
        >>> sorted((sorted(k), v) for k, v in s.split_frequencies().items())
        [(['B', 'D'], 0.5), (['C', 'D'], 0.5)]
        """
        counts = split_counts(self.trees, len(self.taxa))
        n = len(self.trees)
        return {mask_labels(m, self.taxa): c / n for m, c in counts.items()}


def split_counts(trees: Sequence[Tree], n_taxa: int) -> dict[int, int]:
    """How many trees contain each non-trivial split, as a bitset without bit 0."""
    full = (1 << n_taxa) - 1
    counts: dict[int, int] = {}
    for tree in trees:
        seen = set()
        for m in clade_masks(tree):
            if m & 1:
                m = full ^ m
            if m & (m - 1) and (full ^ m) & ((full ^ m) - 1) and m != 0:
                seen.add(m)
        for m in seen:
            counts[m] = counts.get(m, 0) + 1
    return counts


def mask_labels(mask: int, taxa: Sequence[str]) -> frozenset[str]:
    """The labels of the bits set in ``mask``."""
    out = []
    i = 0
    while mask:
        if mask & 1:
            out.append(taxa[i])
        mask >>= 1
        i += 1
    return frozenset(out)


# ---------------------------------------------------------------------------------------------
# Tokens


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


class _Lexer:
    """The tokens of a text as ``(kind, value, offset)``; an ``"x"`` token ends a broken text.

    An iterator whose position ``pos`` may be moved forward (the fast tree path reads a whole
    tree at once and then moves it past the tree).
    """

    def __init__(self, text: str):
        self.text = text
        self.pos = 0
        self._match = _TOKEN.match

    def __iter__(self) -> _Lexer:
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


class _Bad(Exception):
    """A problem inside one statement: its offset and message (turned into a Problem)."""

    def __init__(self, pos: int, message: str, hint: str = "", *, at_end: bool = False):
        super().__init__(message)
        self.pos = pos
        self.message = message
        self.hint = hint
        self.at_end = at_end  # the statement's ';' (or the end of the text) is already read


@dataclass
class _RawTree:
    """A parsed tree before its tips are mapped onto the sample's taxa."""

    pos: int
    parent: list[int] | np.ndarray
    length: list[float] | np.ndarray
    names: list[str | None]  # tip name (translated) or None for internal nodes
    labels: list[str | None]


class _Namespace:
    """How tip tokens become taxon names: TRANSLATE keys, TAXLABELS numbers, or as written."""

    def __init__(self) -> None:
        self.translate: dict[str, str] = {}
        self.taxlabels: list[str] = []

    def numbered(self) -> np.ndarray | None:
        """When every TRANSLATE key is a plain number: an object array, name by key (None
        where no key); else None."""
        keys = self.translate
        if not keys or not all(k.isdigit() and k.isascii() for k in keys):
            return None
        if any(k != str(int(k)) for k in keys) or max(int(k) for k in keys) > 10 * len(keys):
            return None  # leading zeros, or keys too sparse for an array
        table = np.full(max(int(k) for k in keys) + 1, None, dtype=object)
        for k, name in keys.items():
            table[int(k)] = name
        return table

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
        raise _Bad(pos, f"unknown {what} {token!r} in tree", hint)


def _parse_tree(tokens: Iterator[Token], first: Token, names: _Namespace) -> _RawTree:
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
                raise _Bad(pos, "unexpected '(' after a node (missing ',')")
            stack.append([])
        elif kind == "," or kind == ")":
            if cur < 0:
                raise _Bad(pos, f"empty node before {kind!r} (a tip without a label)")
            if not stack:
                raise _Bad(pos, f"unbalanced {kind!r}: no '(' is open")
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
                    raise _Bad(pos, f"tip label {name!r} appears twice in this tree")
                seen[name] = pos
                cur = len(parent)
                parent.append(-1)
                length.append(math.nan)
                tipname.append(name)
                label.append(name)
            elif tipname[cur] is None and label[cur] is None and not has_length:
                label[cur] = value
            else:
                raise _Bad(pos, f"unexpected label {value!r} (missing ',' or ')')")
        elif kind == ":":
            if cur < 0 or has_length:
                raise _Bad(pos, "unexpected ':'")
            kind, value, pos = next(tokens, ("", "", -1))
            while kind == "c":
                kind, value, pos = next(tokens, ("", "", -1))
            if kind != "w" or not _NUMBER.match(value):
                shown = value or kind or "end of file"
                raise _Bad(
                    pos if pos >= 0 else start,
                    f"branch length {shown!r} is not a number",
                    at_end=kind in ("", ";"),
                )
            length[cur] = float(value)
            has_length = True
        elif kind == ";":
            if stack:
                raise _Bad(
                    start, f"unbalanced parentheses: {len(stack)} '(' not closed", at_end=True
                )
            if cur < 0:
                raise _Bad(pos, "empty tree", at_end=True)
            return _RawTree(start, parent, length, tipname, label)
        elif kind == "x":
            raise _Bad(pos, value, at_end=value.startswith("unterminated"))
        elif kind == "":
            if stack:
                raise _Bad(
                    start,
                    f"truncated tree: {len(stack)} '(' not closed at end of file",
                    at_end=True,
                )
            raise _Bad(start, "truncated tree: no ';' at its end", at_end=True)
        else:
            raise _Bad(pos, f"unexpected {kind!r} in tree")
        kind, value, pos = next(tokens, ("", "", -1))


_SIMPLE_COMMENT = re.compile(r"\[[^\[\]]*\]")
_SPACE_AROUND = re.compile(r"\s*([(),:])\s*")
_SPACE = re.compile(r"\s")


def _has_space(text: str) -> bool:
    # substring tests are several times faster than a regex search on long tree lines
    return any(c in text for c in " \n\r\t\f\v") or (
        not text.isascii() and bool(_SPACE.search(text))
    )


def _plain_body(text: str, start: int) -> tuple[str, int] | None:
    """The tree from ``start`` to the next ``;`` with comments and spaces between tokens taken
    out, and the offset after the ``;``; None when it holds anything the batch parser does not
    take (quotes, nested comments, a space inside a label, no leading ``(``)."""
    end = text.find(";", start)
    if end < 0:
        return None
    body = text[start:end]
    if "'" in body:
        return None
    if "[" in body or "]" in body:
        body = _SIMPLE_COMMENT.sub("", body)
        if "[" in body or "]" in body:
            return None
    body = body.strip()
    if _has_space(body):
        body = _SPACE_AROUND.sub(r"\1", body)
        if _has_space(body):
            return None
    if not body.startswith("("):
        return None
    return body, end + 1


_KIND = np.zeros(256, dtype=np.int8)  # delimiter kinds: ( 1, ) 2, ',' 3, : 4, ; 5
for _code, _char in enumerate(b"(),:;", start=1):
    _KIND[_char] = _code


def _joined(b: np.ndarray, starts: np.ndarray, ends: np.ndarray) -> bytes:
    """The bytes of the disjoint spans ``[starts, ends)`` of ``b``, each followed by ``,``."""
    inside = np.zeros(b.size + 1, dtype=np.int32)
    np.add.at(inside, starts, 1)
    np.add.at(inside, ends, -1)
    keep = np.cumsum(inside[:-1]) > 0
    keep[ends] = True
    out = b.copy()
    out[ends] = 44
    return out[keep].tobytes()


_POW10 = 10.0 ** np.arange(31)


def _decimals(b: np.ndarray, starts: np.ndarray, ends: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Parse the numbers written in the spans ``[starts, ends)`` of ``b``, all at once:
    ``(values, good)``, ``good`` False where a span is not ``[+-]?(d+.?d*|.d+)([eE][+-]?d+)?``.

    The digits of the mantissa make an integer ``M`` and the exponent a power ``10**k``; when
    ``M < 2**53`` and ``|k| <= 22`` both are exact floats, so one multiplication or division is
    correctly rounded (Clinger 1990, PLDI) and equals Python's ``float(text)``; other spans
    are parsed by ``float``. Measured on benchmarks/bench_consensus.py: 400,000 branch lengths
    in 0.05 s, against 0.3 s making a Python string of each.
    """
    n = ends - starts
    k = n.size
    span = np.repeat(np.arange(k, dtype=np.int32), n)
    first = (np.cumsum(n) - n).astype(np.int32)
    rel = np.arange(span.size, dtype=np.int32) - first[span]
    c = b[starts[span] + rel]
    digit = (c >= 48) & (c <= 57)
    is_e, is_dot, is_sign = (c == 101) | (c == 69), c == 46, (c == 43) | (c == 45)
    good = (n > 0) & (np.bincount(span[~(digit | is_e | is_dot | is_sign)], minlength=k) == 0)
    good &= np.bincount(span[is_e], minlength=k) <= 1
    e_at = np.full(k, np.iinfo(np.int32).max, dtype=np.int32)
    e_at[span[is_e]] = rel[is_e]
    mant = rel < e_at[span]
    good &= np.bincount(span[is_dot & mant], minlength=k) == np.bincount(span[is_dot], minlength=k)
    good &= np.bincount(span[is_dot], minlength=k) <= 1
    good &= np.bincount(span[is_sign & (rel != 0) & (rel != e_at[span] + 1)], minlength=k) == 0
    md, ed = digit & mant, digit & ~mant
    n_mant = np.bincount(span[md], minlength=k)
    has_e = e_at < np.iinfo(np.int32).max
    good &= (n_mant > 0) & (~has_e | (np.bincount(span[ed], minlength=k) > 0))
    dot_at = np.full(k, np.iinfo(np.int32).max, dtype=np.int32)
    dot_at[span[is_dot]] = rel[is_dot]
    counted = np.cumsum(md) - np.concatenate([[0], np.cumsum(md)])[first][span]
    place = np.minimum(n_mant[span] - counted, 30)  # digits after this one in the mantissa
    mantissa = np.bincount(span[md], weights=(c[md] - 48) * _POW10[place[md]], minlength=k)
    frac = np.bincount(span[md & (rel > dot_at[span])], minlength=k)
    exponent = np.zeros(k)
    minus = np.zeros(k, bool)
    if has_e.any():
        e_counted = np.cumsum(ed) - np.concatenate([[0], np.cumsum(ed)])[first][span]
        e_place = np.minimum(np.bincount(span[ed], minlength=k)[span] - e_counted, 30)
        exponent = np.bincount(span[ed], weights=(c[ed] - 48) * _POW10[e_place[ed]], minlength=k)
        minus[span[(c == 45) & (rel == e_at[span] + 1)]] = True
    exponent = np.where(minus, -exponent, exponent) - frac
    exact = good & (n_mant <= 15) & (np.abs(exponent) <= 22)
    power = _POW10[np.abs(np.where(exact, exponent, 0)).astype(np.int64)]
    values = np.where(exponent >= 0, mantissa * power, mantissa / power)
    values = np.where(b[starts] == 45, -values, values)
    raw = b.tobytes()
    for i in np.flatnonzero(good & ~exact).tolist():
        values[i] = float(raw[starts[i] : ends[i]])
    return values, good


def _parse_batch(bodies: list[str], names: _Namespace) -> list[tuple | None]:
    """Parse many plain tree bodies at once with whole-array steps.

    The text is cut at its delimiters ``( ) , : ;``; the piece after each delimiter is a tip
    label (after ``(`` or ``,``), a node label (after ``)``) or a branch length (after ``:``).
    Tips and ``)`` come in postorder, so node ids are ranks by position, and the parent of a
    node at depth ``d`` is the first ``)`` after it that closes to depth ``d - 1`` (one
    ``searchsorted`` over keys ``(depth, position)``). Returns per body ``(parent, length,
    names, labels)``, or None for any body with a problem: those are read again token by
    token, so that every error is reported by one parser with its line. Measured on
    benchmarks/bench_consensus.py (200 taxa x 1,000 trees): 4.5 s token by token, 0.5 s here.
    """
    count = len(bodies)
    raw = (";".join(bodies) + ";").encode()
    b = np.frombuffer(raw, dtype=np.uint8)
    kinds = _KIND[b]
    dpos = np.flatnonzero(kinds)  # the text after delimiter i is raw[dpos[i] + 1 : dpos[i + 1]]
    dk = kinds[dpos]
    empty_after = np.diff(dpos, append=len(raw) + 1) == 1
    is_semi = dk == 5
    tree_of = np.cumsum(is_semi) - is_semi
    cum = np.cumsum((dk == 1).astype(np.int64) - (dk == 2))
    ends = np.flatnonzero(is_semi)
    depth = cum - np.concatenate([[0], cum[ends[:-1]]])[tree_of]  # after each delimiter
    ok = (depth[ends] == 0) & (np.minimum.reduceat(depth, np.r_[0, ends[:-1] + 1]) >= 0)

    def spoil(bad: np.ndarray, trees: np.ndarray) -> None:
        ok[np.unique(trees[bad])] = False

    after = np.append(dk[1:], 5)  # the kind of the next delimiter
    opener = (dk == 1) | (dk == 3)
    tip_d = np.flatnonzero(opener & ~(empty_after & (after == 1)))
    spoil(empty_after[tip_d], tree_of[tip_d])  # an empty tip
    ev_d = np.sort(np.concatenate([tip_d, np.flatnonzero(dk == 2)]))
    is_tip = opener[ev_d]
    ev_tree = tree_of[ev_d]
    level = depth[ev_d]
    first = np.searchsorted(ev_tree, np.arange(count))
    last = np.maximum(np.searchsorted(ev_tree, np.arange(count), "right") - 1, first)
    closers = np.flatnonzero(~is_tip)
    if closers.size == 0 or last[-1] >= ev_d.size:
        return [None] * count
    ok &= ~is_tip[last] & (level[last] == 0)
    ok &= np.bincount(ev_tree[level == 0], minlength=count) == 1
    is_root = np.zeros(ev_d.size, bool)
    is_root[last] = True
    band = np.int64(dk.size + 1)
    key = (level[closers] + 1) * band + ev_d[closers]
    by_key = np.argsort(key)
    key = key[by_key]
    child = np.flatnonzero(~is_root)
    j = np.minimum(np.searchsorted(key, level[child] * band + ev_d[child], "right"), key.size - 1)
    parent = np.full(ev_d.size, -1, dtype=np.int64)
    parent[child] = closers[by_key[j]]
    spoil(
        (key[j] // band != level[child]) | (ev_tree[parent[child]] != ev_tree[child]),
        ev_tree[child],
    )
    parent[child] -= first[ev_tree[child]]
    spoil(after[ev_d] == 1, ev_tree)  # a node followed by '(' (a missing comma)
    has = np.flatnonzero(after[ev_d] == 4)  # a ':' and a length after the label
    at = ev_d[has] + 2
    spoil((dk[at] == 1) | (dk[at] == 4), ev_tree[has])  # '(' or another ':' after it
    length = np.full(ev_d.size, np.nan)
    if has.size:
        values, good = _decimals(b, dpos[at - 1] + 1, dpos[at])
        length[has] = values
        spoil(~good, ev_tree[has])  # not a number: the token path names it
    tips = np.flatnonzero(is_tip)
    t_start, t_end = dpos[ev_d[tips]] + 1, dpos[ev_d[tips] + 1]
    numbered = names.numbered()
    plain_keys = numbered is not None and bool(np.all(t_end > t_start))
    if plain_keys:  # digits only, no leading zero: the text is the number's own spelling
        c = b[t_start]
        plain_keys = bool(np.all((c >= 49) & (c <= 57) | ((c == 48) & (t_end - t_start == 1))))
        plain_keys = plain_keys and not _joined(b, t_start, t_end).translate(None, b"0123456789,")
    if plain_keys:
        # numeric TRANSLATE keys (what MCMC programs write): look them up as an array
        keys = _decimals(b, t_start, t_end)[0]
        known = keys < len(numbered)
        tip_labels = numbered[np.where(known, keys, 0).astype(np.int64)]
        tip_labels[~known] = None
        spoil(~known | np.equal(tip_labels, None), ev_tree[tips])
    else:
        tip_labels = _joined(b, t_start, t_end).decode().split(",")[:-1]
        table = names.translate
        if table or names.taxlabels:
            mapped = [table.get(x) for x in tip_labels]
            for i in [i for i, x in enumerate(mapped) if x is None]:
                try:
                    mapped[i] = names.name(tip_labels[i], 0)
                except _Bad:
                    mapped[i] = tip_labels[i]
                    ok[ev_tree[tips[i]]] = False
            tip_labels = mapped
    slots = np.full(ev_d.size, None, dtype=object)
    slots[tips] = tip_labels
    node_names: list[str | None] = slots.tolist()
    labels = list(node_names)
    inner = closers[~empty_after[ev_d[closers]]]
    for v, x, y in zip(inner.tolist(), dpos[ev_d[inner]] + 1, dpos[ev_d[inner] + 1]):
        labels[v] = raw[x:y].decode()
    out: list[tuple | None] = [None] * count
    n_tips = np.bincount(ev_tree[is_tip], minlength=count).tolist()
    parent32 = parent.astype(np.int32)
    for t in np.flatnonzero(ok).tolist():
        a, z = int(first[t]), int(last[t]) + 1
        names_here = node_names[a:z]
        if len(set(names_here)) != n_tips[t] + 1:  # a duplicate tip: the token path reports it
            continue
        out[t] = (parent32[a:z], length[a:z], names_here, labels[a:z])
    return out


def _skip_to_semicolon(tokens: Iterator[Token]) -> None:
    for kind, _, _ in tokens:
        if kind in ";x":
            return


# ---------------------------------------------------------------------------------------------
# Files


class _Reader:
    """One file's tokens, turned into raw trees plus the problems met on the way."""

    def __init__(self, text: str, file: str):
        self.text = text
        self.file = file
        self.problems = Problems()
        self.names = _Namespace()
        self.trees: list[_RawTree | None] = []
        self.pending: list[tuple[int, int, int, str]] = []  # (index, start, shown, body)
        self._newlines: list[int] | None = None

    def line(self, pos: int) -> int:
        if self._newlines is None:
            self._newlines = [m.start() for m in re.finditer("\n", self.text)]
        return bisect.bisect_left(self._newlines, pos) + 1

    def error(self, pos: int, message: str, hint: str = "") -> None:
        self.problems.error(self.file, self.line(pos), message, hint)

    def full(self) -> bool:
        return len(self.problems.errors) >= _MAX_PROBLEMS

    def tree(self, tokens: _Lexer, first: Token, shown: int = -1) -> None:
        """Read one tree starting at token ``first``; ``shown`` is the offset whose line
        problems name (the ``TREE`` command), by default the tree's own start."""
        shown = first[2] if shown < 0 else shown
        if first[0] in "(c":
            plain = _plain_body(self.text, first[2])
            if plain is not None:  # parsed later with the others, in one batch
                self.pending.append((len(self.trees), first[2], shown, plain[0]))
                self.trees.append(None)
                tokens.pos = plain[1]
                return
        try:
            raw = _parse_tree(tokens, first, self.names)
            raw.pos = shown
            self.trees.append(raw)
        except _Bad as bad:
            self.error(bad.pos, bad.message, bad.hint)
            if not bad.at_end:
                _skip_to_semicolon(tokens)

    def flush(self) -> None:
        """Parse the trees waiting for the batch parser; any it refuses go token by token."""
        if not self.pending:
            return
        parsed = _parse_batch([body for _, _, _, body in self.pending], self.names)
        for (index, start, shown, _), result in zip(self.pending, parsed):
            if result is not None:
                self.trees[index] = _RawTree(shown, *result)
                continue
            tokens = _Lexer(self.text)
            tokens.pos = start
            try:
                self.trees[index] = _parse_tree(tokens, next(tokens), self.names)
                self.trees[index].pos = shown
            except _Bad as bad:
                self.error(bad.pos, bad.message, bad.hint)
        self.pending = []

    def read(self) -> None:
        tokens = _Lexer(self.text)
        first = next(tokens, None)
        while first is not None and first[0] == "c":
            first = next(tokens, None)
        if first is None:
            self.problems.error(self.file, None, "empty file: no trees")
            return
        if first[0] == "w" and first[1].upper() == "#NEXUS":
            self.nexus(tokens)  # each TREES block is flushed at its end (its TRANSLATE)
        else:
            token: Token | None = first
            while token is not None and not self.full():
                if token[0] != "c":
                    self.tree(tokens, token)
                token = next(tokens, None)
        self.flush()
        self.trees = [raw for raw in self.trees if raw is not None]

    # NEXUS --------------------------------------------------------------------------------

    def command(self, tokens: Iterator[Token]) -> Token | None:
        """The first token of the next command, skipping comments and stray ``;``."""
        for token in tokens:
            if token[0] not in "c;":
                return token
        return None

    def nexus(self, tokens: Iterator[Token]) -> None:
        while not self.full():
            token = self.command(tokens)
            if token is None:
                return
            kind, value, pos = token
            if kind == "x":
                self.error(pos, value)
                return
            if kind != "w" or value.upper() != "BEGIN":
                self.error(pos, f"expected BEGIN, found {value or kind!r}")
                _skip_to_semicolon(tokens)
                continue
            begin, errors = pos, len(self.problems.errors)
            kind, block, pos = next(tokens, ("", "", pos))
            _skip_to_semicolon(tokens)
            block = block.upper()
            if block == "TREES":
                closed = self.trees_block(tokens)
                self.flush()
            elif block == "TAXA":
                closed = self.taxa_block(tokens)
            else:
                closed = self.skip_block(tokens)
            if not closed and len(self.problems.errors) == errors:  # else already said
                self.error(
                    len(self.text),
                    f"the {block} block begun on line {self.line(begin)} has no END",
                    "the file may be cut short",
                )

    # Each block reader returns False when the text ends before the block's END.

    def skip_block(self, tokens: Iterator[Token]) -> bool:
        while True:
            token = self.command(tokens)
            if token is None:
                return False
            if token[0] == "w" and token[1].upper() in ("END", "ENDBLOCK"):
                _skip_to_semicolon(tokens)
                return True
            if token[0] != ";":
                _skip_to_semicolon(tokens)

    def taxa_block(self, tokens: Iterator[Token]) -> bool:
        while True:
            token = self.command(tokens)
            if token is None:
                return False
            word = token[1].upper() if token[0] == "w" else ""
            if word in ("END", "ENDBLOCK"):
                _skip_to_semicolon(tokens)
                return True
            if word != "TAXLABELS":
                _skip_to_semicolon(tokens)
                continue
            for kind, value, pos in tokens:
                if kind == ";":
                    break
                if kind in "wq":
                    self.names.taxlabels.append(value)
                elif kind == "x":
                    self.error(pos, value)
                    return True

    def trees_block(self, tokens: Iterator[Token]) -> bool:
        while not self.full():
            token = self.command(tokens)
            if token is None:
                return False
            kind, value, pos = token
            if kind == "x":
                self.error(pos, value)
                return True
            word = value.upper() if kind == "w" else ""
            if word in ("END", "ENDBLOCK"):
                _skip_to_semicolon(tokens)
                return True
            if word == "TRANSLATE":
                self.translate(tokens)
            elif word in ("TREE", "UTREE"):
                self.tree_command(tokens, pos)
            else:
                _skip_to_semicolon(tokens)
        return True

    def translate(self, tokens: Iterator[Token]) -> None:
        pair: list[str] = []
        for kind, value, pos in tokens:
            if kind == "c":
                continue
            if kind in "wq":
                pair.append(value)
                if len(pair) > 2:
                    self.error(pos, f"TRANSLATE: unexpected {value!r} (missing ',')")
                    _skip_to_semicolon(tokens)
                    return
                continue
            if kind in ",;":
                if len(pair) == 2:
                    if pair[0] in self.names.translate:
                        self.error(pos, f"TRANSLATE: key {pair[0]!r} given twice")
                    self.names.translate[pair[0]] = pair[1]
                elif pair or kind == ",":
                    self.error(pos, "TRANSLATE: each entry needs a key and a label")
                pair = []
                if kind == ";":
                    return
                continue
            self.error(pos, value if kind == "x" else f"TRANSLATE: unexpected {kind!r}")
            if kind != "x":
                _skip_to_semicolon(tokens)
            return

    def tree_command(self, tokens: Iterator[Token], start: int) -> None:
        """``TREE [*] name [comments] = newick ;``"""
        for kind, value, pos in tokens:
            if kind == "=":
                break
            if kind in "wqc":
                continue
            self.error(pos, value if kind == "x" else f"TREE: expected '=', found {kind!r}")
            if kind not in "x;":
                _skip_to_semicolon(tokens)
            return
        else:
            self.error(start, "truncated TREE command at end of file")
            return
        first = next(tokens, ("", "", -1))
        if first[0] == "":
            self.error(start, "truncated TREE command at end of file")
            return
        self.tree(tokens, first, start)


def read_tree_file(path: str | Path, *, burnin: float = 0.0, thin: int = 1) -> TreeSample:
    """Read every tree of a Newick or NEXUS file; drop ``floor(read * burnin)`` trees from the
    start, then keep every ``thin``-th tree (the first kept is the first after burn-in).

    All trees must have the same tip labels; ``taxa`` is their sorted tuple.
    """
    file = str(path)
    if not (isinstance(burnin, (int, float)) and 0.0 <= burnin < 1.0):
        raise AtlasError(f"burn-in must be a fraction in [0, 1), not {burnin!r}")
    if not (isinstance(thin, int) and thin >= 1):
        raise AtlasError(f"thin must be a whole number >= 1, not {thin!r}")
    try:
        text = Path(path).read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise AtlasError(_problem(file, "file not found")) from None
    except UnicodeDecodeError as err:
        raise AtlasError(_problem(file, f"not UTF-8 text ({err.reason})")) from None
    except OSError as err:
        raise AtlasError(_problem(file, f"cannot read: {err.strerror}")) from None
    reader = _Reader(text, file)
    reader.read()
    reader.problems.raise_if_any()
    if not reader.trees:
        raise AtlasError(_problem(file, "no trees found"))
    taxa = _check_tips(reader)
    read = len(reader.trees)
    dropped = math.floor(read * burnin)
    kept = reader.trees[dropped::thin]
    if not kept:
        raise AtlasError(_problem(file, f"burn-in {burnin} drops all {read} trees"))
    index = {name: i for i, name in enumerate(taxa)}
    trees = [_to_tree(raw, taxa, index) for raw in kept]
    return TreeSample(file, taxa, trees, read, dropped, thin)


def _problem(file: str, message: str) -> Problem:
    return Problem(file, None, message)


def _check_tips(reader: _Reader) -> tuple[str, ...]:
    """The sorted tip labels of the first tree; every other tree must have the same ones."""
    first = reader.trees[0]
    expected = {n for n in first.names if n is not None}
    for i, raw in enumerate(reader.trees[1:], start=2):
        tips = {n for n in raw.names if n is not None}
        if tips != expected:
            missing = ", ".join(sorted(expected - tips)) or "none"
            extra = ", ".join(sorted(tips - expected)) or "none"
            reader.error(
                raw.pos,
                f"tree {i} has other tips than tree 1 (line {reader.line(first.pos)}): "
                f"missing {missing}; extra {extra}",
            )
            if reader.full():
                break
    reader.problems.raise_if_any()
    return tuple(sorted(expected))


def _to_tree(raw: _RawTree, taxa: tuple[str, ...], index: dict[str, int]) -> Tree:
    tip = [-1 if n is None else index[n] for n in raw.names]
    return Tree(
        np.array(raw.parent, dtype=np.int32),
        np.array(raw.length, dtype=np.float64),
        np.array(tip, dtype=np.int32),
        taxa,
        tuple(raw.labels),
    )


def parse_newick(text: str, *, taxa: Sequence[str] | None = None, file: str = "<newick>") -> Tree:
    """One tree from a Newick string (the final ``;`` may be left out).

    ``taxa`` is the namespace (sorted tip labels by default); every tip label must be in it.

    >>> t = parse_newick("((A:1,B:2)0.9:1.5e-1,'C d':3);")
    >>> t.taxa, t.parent.tolist(), t.label[2], t.length.tolist()[:3]
    (('A', 'B', 'C d'), [2, 2, 4, 4, -1], '0.9', [1.0, 2.0, 0.15])
    """
    if not text.rstrip().endswith(";"):
        text = text + ";"
    reader = _Reader(text, file)
    reader.read()
    reader.problems.raise_if_any()
    if len(reader.trees) != 1:
        raise AtlasError(_problem(file, f"expected one tree, found {len(reader.trees)}"))
    raw = reader.trees[0]
    names = sorted(n for n in raw.names if n is not None)
    space = tuple(names) if taxa is None else tuple(taxa)
    index = {name: i for i, name in enumerate(space)}
    unknown = [n for n in names if n not in index]
    if unknown:
        raise AtlasError(_problem(file, "tips not in the taxa: " + ", ".join(unknown)))
    return _to_tree(raw, space, index)


_NEEDS_QUOTES = re.compile(r"[\s()\[\]',:;=]")


def quote_label(label: str) -> str:
    """A label as Newick text: quoted (``'`` doubled) when it holds a space or punctuation.

    >>> quote_label("Old lamp"), quote_label("it's"), quote_label("lamp_07")
    ("'Old lamp'", "'it''s'", 'lamp_07')
    """
    if label and not _NEEDS_QUOTES.search(label):
        return label
    return "'" + label.replace("'", "''") + "'"


def write_newick(tree: Tree, *, lengths: bool = True, support: np.ndarray | None = None) -> str:
    """The tree as one Newick line ending in ``;``.

    Internal nodes are labelled with ``support`` (formatted ``%.4g``; ``nan`` skipped) when it
    is given, else with their own labels; branch lengths use the shortest exact float text.

    >>> write_newick(parse_newick("((A:1,B:2):0.5,C:3);"))
    '((A:1.0,B:2.0):0.5,C:3.0);'
    """
    parts: list[str] = [""] * tree.n_nodes
    tip = tree.tip.tolist()
    length = tree.length.tolist()
    for v in range(tree.n_nodes):
        if tip[v] >= 0:
            text = quote_label(tree.taxa[tip[v]])
        else:
            text = "(" + ",".join(parts[c] for c in tree.children(v).tolist()) + ")"
            if support is not None:
                if not math.isnan(support[v]):
                    text += f"{float(support[v]):.4g}"
            elif tree.label[v] is not None:
                text += quote_label(str(tree.label[v]))
        if lengths and not math.isnan(length[v]):
            text += ":" + repr(length[v])
        parts[v] = text
    return parts[-1] + ";" if parts else ";"

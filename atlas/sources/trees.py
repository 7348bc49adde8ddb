"""Reading trees: Newick and NEXUS files, one tree or a posterior sample.

A small tokenizer of our own turns the text into tokens (punctuation, words, quoted labels,
comments; :mod:`atlas.sources.tree_tokens`); the NEXUS commands are read here, and each tree
statement is built in postorder, either by the batch parser (:mod:`atlas.sources.trees_fast`,
the plain trees MCMC programs write, all of a TREES block at once) or token by token (any
other tree, and every tree with a problem, so that problems are worded by one parser).
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

from atlas.analysis.tree import Tree, clade_masks, trees_from_arrays
from atlas.errors import AtlasError, Problem, Problems
from atlas.sources.tree_tokens import (
    Bad,
    Lexer,
    Namespace,
    RawTree,
    Token,
    parse_tree_tokens,
    skip_to_semicolon,
)
from atlas.sources.trees_fast import RawTrees, parse_batch, plain_body

_MAX_PROBLEMS = 50  # stop collecting after this many (a broken file would list thousands)
# A TREE command's name and comments, '=', then comments up to the tree's '(' (group 1 marks
# the first token after '='): the token loop of _Reader.tree_command in one match. Measured on
# benchmarks/bench_consensus.py (its TRANSLATE and 1,000 TREE commands, best of 5 on a loaded
# machine): 0.012 s for the NEXUS commands, against 0.025 s token by token.
_TREE_HEAD = re.compile(
    r"(?:\s*+(?:[^\s()\[\]',:;=]++|\[[^\[\]]*+\]))*+\s*+=\s*+()(?:\[[^\[\]]*+\]\s*+)*+\("
)


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
# Files


class _Reader:
    """One file's tokens, turned into raw trees plus the problems met on the way."""

    def __init__(self, text: str, file: str):
        self.text = text
        self.file = file
        self.problems = Problems()
        self.names = Namespace()
        self.codes: dict[str, int] = {}  # every tip name met, numbered in order
        self.slots: list[tuple[RawTrees, int] | None] = []  # each tree: (its batch, index)
        self.pending: list[tuple[int, int, int, str]] = []  # (slot, start, shown, body)
        self.trees: RawTrees | None = None  # after read(): the trees read, in order
        self._newlines: list[int] | None = None

    def line(self, pos: int) -> int:
        if self._newlines is None:
            self._newlines = [m.start() for m in re.finditer("\n", self.text)]
        return bisect.bisect_left(self._newlines, pos) + 1

    def error(self, pos: int, message: str, hint: str = "") -> None:
        self.problems.error(self.file, self.line(pos), message, hint)

    def full(self) -> bool:
        return len(self.problems.errors) >= _MAX_PROBLEMS

    def tree(self, tokens: Lexer, first: Token, shown: int = -1) -> None:
        """Read one tree starting at token ``first``; ``shown`` is the offset whose line
        problems name (the ``TREE`` command), by default the tree's own start."""
        shown = first[2] if shown < 0 else shown
        if first[0] in "(c":
            plain = plain_body(self.text, first[2])
            if plain is not None:  # parsed later with the others, in one batch
                self.pending.append((len(self.slots), first[2], shown, plain[0]))
                self.slots.append(None)
                tokens.pos = plain[1]
                return
        self.slots.append(self.tokens_tree(tokens, first, shown))

    def tokens_tree(self, tokens: Lexer, first: Token, shown: int) -> tuple[RawTrees, int] | None:
        """One tree token by token, or None after recording its problem."""
        try:
            raw = parse_tree_tokens(tokens, first, self.names)
        except Bad as bad:
            self.error(bad.pos, bad.message, bad.hint)
            if not bad.at_end:
                skip_to_semicolon(tokens)
            return None
        return _one_tree(raw, shown, self.codes), 0

    def flush(self) -> None:
        """Parse the trees waiting for the batch parser; any it refuses go token by token."""
        if not self.pending:
            return
        parsed, ok = parse_batch([body for _, _, _, body in self.pending], self.names, self.codes)
        k = 0
        for (slot, start, shown, _), good in zip(self.pending, ok.tolist()):
            if good:
                parsed.pos[k] = shown
                self.slots[slot] = (parsed, k)
                k += 1
                continue
            tokens = Lexer(self.text)
            tokens.pos = start
            self.slots[slot] = self.tokens_tree(tokens, next(tokens), shown)
        self.pending = []

    def read(self) -> None:
        tokens = Lexer(self.text)
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
        self.trees = _assemble([slot for slot in self.slots if slot is not None])

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
                skip_to_semicolon(tokens)
                continue
            begin, errors = pos, len(self.problems.errors)
            kind, block, pos = next(tokens, ("", "", pos))
            skip_to_semicolon(tokens)
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
                skip_to_semicolon(tokens)
                return True
            if token[0] != ";":
                skip_to_semicolon(tokens)

    def taxa_block(self, tokens: Iterator[Token]) -> bool:
        while True:
            token = self.command(tokens)
            if token is None:
                return False
            word = token[1].upper() if token[0] == "w" else ""
            if word in ("END", "ENDBLOCK"):
                skip_to_semicolon(tokens)
                return True
            if word != "TAXLABELS":
                skip_to_semicolon(tokens)
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
                skip_to_semicolon(tokens)
                return True
            if word == "TRANSLATE":
                self.translate(tokens)
            elif word in ("TREE", "UTREE"):
                self.tree_command(tokens, pos)
            else:
                skip_to_semicolon(tokens)
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
                    skip_to_semicolon(tokens)
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
                skip_to_semicolon(tokens)
            return

    def tree_command(self, tokens: Lexer, start: int) -> None:
        """``TREE [*] name [comments] = newick ;``"""
        head = _TREE_HEAD.match(self.text, tokens.pos)
        if head is not None:  # the usual command up to the tree's '(' in one match
            plain = plain_body(self.text, head.end() - 1)
            if plain is not None:
                self.pending.append((len(self.slots), head.start(1), start, plain[0]))
                self.slots.append(None)
                tokens.pos = plain[1]
                return
        for kind, value, pos in tokens:
            if kind == "=":
                break
            if kind in "wqc":
                continue
            self.error(pos, value if kind == "x" else f"TREE: expected '=', found {kind!r}")
            if kind not in "x;":
                skip_to_semicolon(tokens)
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
    raw = reader.trees
    if raw is None or not len(raw):
        raise AtlasError(_problem(file, "no trees found"))
    taxa = _check_tips(reader, raw)
    read = len(raw)
    dropped = math.floor(read * burnin)
    kept = np.arange(dropped, read, thin)
    if not kept.size:
        raise AtlasError(_problem(file, f"burn-in {burnin} drops all {read} trees"))
    trees = _to_trees(raw.take(kept), taxa, reader.codes)
    return TreeSample(file, taxa, trees, read, dropped, thin)


def _problem(file: str, message: str) -> Problem:
    return Problem(file, None, message)


def _one_tree(raw: RawTree, pos: int, codes: dict[str, int]) -> RawTrees:
    """A tree from the token parser as a batch of one, its tip names numbered in ``codes``."""
    code = [-1 if n is None else codes.setdefault(n, len(codes)) for n in raw.names]
    labels = {
        v: label
        for v, (name, label) in enumerate(zip(raw.names, raw.labels))
        if name is None and label is not None
    }
    return RawTrees(
        np.array(raw.parent, dtype=np.int32),
        np.array(raw.length, dtype=np.float64),
        np.array(code, dtype=np.int32),
        [labels or None],
        np.array([0, len(code)], dtype=np.int64),
        [pos],
    )


def _assemble(slots: list[tuple[RawTrees, int]]) -> RawTrees | None:
    """The trees of ``slots`` in order, taking runs of one batch whole."""
    runs: list[list] = []  # [batch, first, end]
    for batch, k in slots:
        if runs and runs[-1][0] is batch and runs[-1][2] == k:
            runs[-1][2] = k + 1
        else:
            runs.append([batch, k, k + 1])
    if not runs:
        return None
    return RawTrees.join([batch.take(np.arange(a, z)) for batch, a, z in runs])


def _check_tips(reader: _Reader, raw: RawTrees) -> tuple[str, ...]:
    """The sorted tip labels of the first tree; every other tree must have the same ones.

    Neither parser lets a tip appear twice in a tree, so a tree has the first tree's tips when
    it has as many and each is one of them: two whole-array counts, then words for the trees
    that differ.
    """
    names = list(reader.codes)
    size = np.diff(raw.offsets)
    tree_of = np.repeat(np.arange(len(raw)), size)
    is_tip = raw.code >= 0
    first = raw.code[: raw.offsets[1]]
    first = first[first >= 0]
    in_first = np.zeros(len(names) + 1, dtype=bool)
    in_first[first] = True
    n_tips = np.bincount(tree_of[is_tip], minlength=len(raw))
    strangers = np.bincount(tree_of[is_tip & ~in_first[raw.code]], minlength=len(raw))
    expected = {names[c] for c in first.tolist()}
    for i in np.flatnonzero((n_tips != first.size) | (strangers > 0)).tolist():
        codes = raw.code[raw.offsets[i] : raw.offsets[i + 1]]
        tips = {names[c] for c in codes[codes >= 0].tolist()}
        missing = ", ".join(sorted(expected - tips)) or "none"
        extra = ", ".join(sorted(tips - expected)) or "none"
        reader.error(
            raw.pos[i],
            f"tree {i + 1} has other tips than tree 1 (line {reader.line(raw.pos[0])}): "
            f"missing {missing}; extra {extra}",
        )
        if reader.full():
            break
    reader.problems.raise_if_any()
    return tuple(sorted(expected))


def _to_trees(raw: RawTrees, taxa: tuple[str, ...], codes: dict[str, int]) -> list[Tree]:
    """The trees over ``taxa`` (which holds every tip name of ``raw``), built all at once."""
    index = {name: i for i, name in enumerate(taxa)}
    taxon_of = np.array([index.get(name, -1) for name in codes] + [-1], dtype=np.int32)
    tip = taxon_of[raw.code]  # code -1 takes the last entry
    label_of = np.array(list(codes) + [None], dtype=object)
    every = label_of[raw.code].tolist()
    labels = []
    for k, (a, z) in enumerate(zip(raw.offsets[:-1].tolist(), raw.offsets[1:].tolist())):
        here = every[a:z]
        if raw.labels[k]:
            for v, label in raw.labels[k].items():
                here[v] = label
        labels.append(tuple(here))
    return trees_from_arrays(raw.parent, raw.length, tip, raw.offsets, taxa, labels)


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
    raw = reader.trees
    found = 0 if raw is None else len(raw)
    if raw is None or found != 1:
        raise AtlasError(_problem(file, f"expected one tree, found {found}"))
    names = list(reader.codes)
    names = sorted(names[c] for c in raw.code[raw.code >= 0].tolist())
    space = tuple(names) if taxa is None else tuple(taxa)
    index = set(space)
    unknown = [n for n in names if n not in index]
    if unknown:
        raise AtlasError(_problem(file, "tips not in the taxa: " + ", ".join(unknown)))
    return _to_trees(raw, space, reader.codes)[0]


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

"""Markdown notes with YAML front matter: objects, characters, clades and free pages.

A note is ``---``, a YAML mapping, ``---``, then Markdown. The reader keeps the raw Markdown
(it is rendered and sanitised when pages are planned) and the line each front-matter key
stands on, so that the link stage can point at ``objects/lamp-03.md:4``. Translations are
``<id>.<lang>.md`` beside the note and are read into ``translations``.
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass, field
from pathlib import Path

import yaml

from ..errors import Problems
from .text import read_text

_LANG_SUFFIX = re.compile(r"^(?P<stem>.+)\.(?P<lang>[a-z]{2,3}(?:-[A-Za-z0-9]+)?)$")


@dataclass(frozen=True)
class Note:
    file: str
    stem: str  # file name without .md (and without the language suffix)
    meta: dict
    body: str
    body_line: int  # the line where the Markdown body starts
    key_lines: dict[str, int] = field(default_factory=dict)
    translations: dict[str, Note] = field(default_factory=dict)

    def line(self, key: str) -> int:
        return self.key_lines.get(key, 1)


@functools.cache
def _safe_loader():
    # libyaml's parser when PyYAML has it (same documents, same marks); the constructor and
    # resolver stay PyYAML's, so values are the same either way
    class Loader(getattr(yaml, "CSafeLoader", yaml.SafeLoader)):
        pass

    # Dates stay text: "period: 1840-1870" or "date: 2019-05-01" must not become objects.
    Loader.yaml_implicit_resolvers = {
        k: [(tag, rx) for tag, rx in v if tag != "tag:yaml.org,2002:timestamp"]
        for k, v in yaml.SafeLoader.yaml_implicit_resolvers.items()
    }
    return Loader


def parse_note(text: str, shown: str, stem: str, problems: Problems) -> Note | None:
    """Split front matter from body; problems carry the file and line."""
    lines = text.split("\n")
    if not lines or lines[0].strip() != "---":
        return Note(shown, stem, {}, text, 1)
    try:
        end = next(i for i in range(1, len(lines)) if lines[i].strip() in ("---", "..."))
    except StopIteration:
        problems.error(shown, 1, "the front matter that starts with --- is never closed")
        return None
    front = "\n".join(lines[1:end])
    try:  # composed once: the node gives the line of each key and the values
        loader = _safe_loader()(front)
        try:
            node = loader.get_single_node()
            meta = loader.construct_document(node) if node is not None else {}
        finally:
            loader.dispose()
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        line = mark.line + 2 if mark is not None else 1
        reason = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        problems.error(shown, line, f"front matter is not valid YAML: {reason}")
        return None
    if meta is None:
        meta = {}
    if not isinstance(meta, dict):
        problems.error(shown, 2, "front matter must be a mapping of keys to values")
        return None
    key_lines: dict[str, int] = {}
    if isinstance(node, yaml.MappingNode):
        for key_node, _ in node.value:
            key_lines[str(key_node.value)] = key_node.start_mark.line + 2
    meta = {str(k): v for k, v in meta.items()}
    body = "\n".join(lines[end + 1 :])
    return Note(shown, stem, meta, body, end + 2, key_lines)


def read_notes(folder: Path, shown_folder: str, problems: Problems,
               languages: tuple[str, ...] = ()) -> list[Note]:
    """Every ``*.md`` in a folder (not recursive), translations attached to their note.

    ``name.xx.md`` is a translation only when ``xx`` is one of the atlas's languages.
    """
    if not folder.is_dir():
        return []
    base: dict[str, Note] = {}
    translated: list[tuple[str, str, Note]] = []
    for path in sorted(folder.glob("*.md")):
        shown = f"{shown_folder}/{path.name}"
        text = read_text(path, problems, shown)
        if text is None:
            continue
        stem = path.name[:-3]
        match = _LANG_SUFFIX.match(stem)
        if match and match.group("lang") not in languages:
            match = None
        note = parse_note(text, shown, match.group("stem") if match else stem, problems)
        if note is None:
            continue
        if match:
            translated.append((match.group("stem"), match.group("lang"), note))
        else:
            base[stem] = note
    for stem, lang, note in translated:
        if stem in base:
            base[stem].translations[lang] = note
        else:
            problems.warn(note.file, 1, f"translation of {stem!r} has no note {stem}.md beside it")
    return [base[k] for k in sorted(base)]

"""Small tables: the characters CSV, declared contacts (CSV) and coherence rules (TOML).

Each reader turns text into plain records that remember their file and line; ids are
checked against the rest of the atlas later, in the link stage.
"""

from __future__ import annotations

import csv
import io
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import Problems, did_you_mean
from .text import read_text


@dataclass(frozen=True)
class CharacterRow:
    id: str
    label: str
    group: str
    states: dict[str, str]
    ordered: bool
    kind: str  # "discrete" or "continuous"
    file: str
    line: int
    # lang -> {"label": text, "states": {symbol: description}} from label@<lang> and
    # states@<lang> columns (only the non-empty ones)
    translations: dict[str, dict] = field(default_factory=dict)


@dataclass(frozen=True)
class Contact:
    source: str  # an object id or a clade note name
    target: str
    characters: tuple[str, ...]
    note: str
    file: str
    line: int


@dataclass(frozen=True)
class Rule:
    when: tuple[str, str]  # (character, state)
    needs: dict[str, str]
    forbids: dict[str, str]
    note: str
    file: str
    line: int | None


def _rows(text: str, shown: str, problems: Problems, ours: dict[str, str],
          required: tuple[str, ...], localised: tuple[str, ...] = ()):
    """(line, record keyed by our names) for each row of a CSV with mapped column names.

    For each of our keys in ``localised`` (``label``), columns named like its column with a
    language suffix (``label@fr``, or ``Label@fr`` when ``label`` is mapped to ``Label``)
    are in the record too, as ``label@fr``."""
    reader = csv.DictReader(io.StringIO(text))
    header = reader.fieldnames or []
    extra = {f"{key}@{col.split('@', 1)[1]}": col for key in localised for col in header
             if col.startswith(ours[key] + "@") and col != ours[key] + "@"}
    missing = [k for k in required if ours[k] not in header]
    for key in missing:
        problems.error(shown, 1, f"has no column {ours[key]!r} (for {key})",
                       did_you_mean(ours[key], header) or "columns: " + ", ".join(header))
    if missing:
        return
    start = 1
    try:
        for row in reader:
            line = start + 1
            start = reader.line_num
            if None in row:
                problems.error(shown, line, "has more cells than the header has columns")
                continue
            if not any((v or "").strip() for v in row.values()):
                continue
            yield line, {k: (row.get(col) or "").strip()
                         for k, col in (ours | extra).items()}
    except csv.Error as exc:
        problems.error(shown, reader.line_num, f"is not readable CSV: {exc}")


def parse_states(text: str) -> dict[str, str]:
    """``0=absent;1=present`` as a mapping; an empty text gives the binary default.

    >>> parse_states("0=absent; 1=present; 2 = doubled")
    {'0': 'absent', '1': 'present', '2': 'doubled'}
    """
    if not text.strip():
        return {"0": "absent", "1": "present"}
    out: dict[str, str] = {}
    for part in re.split(r"[;|]", text):
        if not part.strip():
            continue
        symbol, _, description = part.partition("=")
        out[symbol.strip()] = description.strip() or symbol.strip()
    return out


_TRUE = {"true", "yes", "1", "ordered"}


def parse_translated_states(text: str) -> dict[str, str]:
    """A ``states@<lang>`` cell (``0=absente;1=présente``) as a mapping; empty gives none.

    >>> parse_translated_states("0=absente; 1=présente"), parse_translated_states("")
    ({'0': 'absente', '1': 'présente'}, {})
    """
    return parse_states(text) if text.strip() else {}


def read_character_table(path: Path, shown: str, problems: Problems,
                         columns: dict[str, str] | None = None) -> list[CharacterRow]:
    """The characters table: ``id,label,group,states,ordered,kind`` (our names, mapped by
    ``columns``) and, for a translation, ``label@<lang>`` and ``states@<lang>`` columns."""
    text = read_text(path, problems, shown)
    if text is None:
        return []
    keys = ("id", "label", "group", "states", "ordered", "kind")
    ours = {k: (columns or {}).get(k, k) for k in keys}
    out: list[CharacterRow] = []
    seen: dict[str, int] = {}
    for line, r in _rows(text, shown, problems, ours, ("id",), ("label", "states")):
        if not r["id"]:
            problems.error(shown, line, "a character has no id")
            continue
        if r["id"] in seen:
            problems.error(shown, line, f"character {r['id']!r} is listed twice "
                           f"(first at line {seen[r['id']]})")
            continue
        seen[r["id"]] = line
        kind = r["kind"] or "discrete"
        if kind not in ("discrete", "continuous"):
            problems.error(shown, line, f"kind {kind!r} is not discrete or continuous")
            kind = "discrete"
        translations: dict[str, dict] = {}
        for key, value in r.items():
            if "@" in key and value:
                what, lang = key.split("@", 1)
                translations.setdefault(lang, {})[what] = (
                    parse_translated_states(value) if what == "states" else value)
        out.append(CharacterRow(
            id=r["id"], label=r["label"] or r["id"], group=r["group"] or "Characters",
            states={} if kind == "continuous" else parse_states(r["states"]),
            ordered=r["ordered"].lower() in _TRUE, kind=kind, file=shown, line=line,
            translations=dict(sorted(translations.items())),
        ))
    return out


def read_contacts(path: Path, shown: str, problems: Problems) -> list[Contact]:
    text = read_text(path, problems, shown)
    if text is None:
        return []
    ours = {k: k for k in ("from", "to", "characters", "note")}
    out = []
    for line, r in _rows(text, shown, problems, ours, ("from", "to")):
        if not r["from"] or not r["to"]:
            problems.error(shown, line, "a contact needs both 'from' and 'to'")
            continue
        out.append(Contact(r["from"], r["to"], tuple(r["characters"].replace(",", " ").split()),
                           r["note"], shown, line))
    return out


def _conditions(value) -> dict[str, str] | None:
    """``{character = "h01", state = "1"}``, a list of those, or ``{h01 = "1"}``; None if bad."""
    items = value if isinstance(value, list) else [value]
    out: dict[str, str] = {}
    for item in items:
        if not isinstance(item, dict):
            return None
        if set(item) == {"character", "state"}:
            out[str(item["character"])] = str(item["state"])
        else:
            out.update({str(k): str(v) for k, v in item.items()})
    return out


def read_rules(path: Path, shown: str, problems: Problems) -> list[Rule]:
    text = read_text(path, problems, shown)
    if text is None:
        return []
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        match = re.search(r"line (\d+)", str(exc))
        problems.error(shown, int(match.group(1)) if match else None, f"is not valid TOML: {exc}")
        return []
    headers = [n for n, raw in enumerate(text.split("\n"), 1) if raw.strip() == "[[rule]]"]
    rules = data.get("rule", [])
    if not isinstance(rules, list):
        problems.error(shown, None, "rules must be written as [[rule]] tables")
        return []
    out = []
    for n, rule in enumerate(rules):
        line = headers[n] if n < len(headers) else None
        when = rule.get("when") if isinstance(rule, dict) else None
        if not isinstance(when, dict) or set(when) != {"character", "state"}:
            problems.error(shown, line, "a rule needs when = {character = \"…\", state = \"…\"}")
            continue
        needs = _conditions(rule.get("needs", {}))
        forbids = _conditions(rule.get("forbids", {}))
        if needs is None or forbids is None or not (needs or forbids):
            problems.error(shown, line, "a rule needs a 'needs' or 'forbids' table: "
                           "{character = \"…\", state = \"…\"}, a list of them, or "
                           "{character id = state}")
            continue
        out.append(Rule((str(when["character"]), str(when["state"])), needs, forbids,
                        str(rule.get("note", "")), shown, line))
    return out

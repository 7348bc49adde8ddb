"""``atlas.toml``: a declared schema, every problem reported at once.

Each option is declared once with its type, default and a sentence saying what it does; the
loader converts the TOML table into a frozen :class:`Config`, collecting every unknown key,
wrong type and bad value as a :class:`~atlas.errors.Problem` with the line it stands on.
Paths in ``[sources]`` stay relative strings here; :func:`Config.path` resolves them against
the atlas folder.
"""

from __future__ import annotations

import re
import tomllib
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import AtlasError, Problems, did_you_mean

CONFIG_NAME = "atlas.toml"
ACCESS_LEVELS = ("public", "community", "restricted")


@dataclass(frozen=True)
class Option:
    """One key of atlas.toml: its type, default, and what it is for."""

    key: str
    kind: type | tuple[type, ...]
    default: Any
    doc: str
    choices: tuple[Any, ...] = ()
    check: Callable[[Any], str] | None = None  # returns a message when the value is wrong


def _fraction(v: Any) -> str:
    return "" if 0 <= v < 1 else "must be at least 0 and below 1"


def _positive(v: Any) -> str:
    return "" if v > 0 else "must be greater than 0"


def _string_list(v: Any) -> str:
    return "" if all(isinstance(x, str) for x in v) else "must be a list of strings"


def _languages(v: Any) -> str:
    if not v:
        return "must name at least one language"
    code = re.compile(r"[a-z]{2,3}(-[A-Za-z0-9]+)?")
    bad = [x for x in v if not isinstance(x, str) or not code.fullmatch(x)]
    return f"has values that are not language codes: {bad}" if bad else ""


def _access_list(v: Any) -> str:
    bad = [x for x in v if x not in ACCESS_LEVELS]
    return f"has unknown access levels {bad} (known: {', '.join(ACCESS_LEVELS)})" if bad else ""


TOP = (
    Option("title", str, None, "The atlas's title, shown on every page. Required."),
    Option("subtitle", str, "", "A line under the title on the home page."),
    Option("languages", list, ["en"], "Interface languages; the first is the default.",
           check=_languages),
    Option("licence", str, "CC-BY-4.0", "SPDX identifier of the content's licence."),
    Option("theme", str, "default", "The theme folder to render with."),
    Option("authors", list, [], "Authors of the atlas, for citations.", check=_string_list),
    Option("base_url", str, "", "Where the site will be published (for sitemap and citations)."),
    Option("credits", list, [], "Citations and acknowledgements for the credits page, one per "
           "entry (e.g. the published datasets the atlas is built from).", check=_string_list),
    Option("cache", bool, True, "Keep analysis results and rendered pages in a hidden "
           ".atlas-cache/ folder of the atlas source, so a rebuild redoes only what changed "
           "(safe to delete; `atlas build --no-cache` ignores it)."),
    Option("page_budget", int, 60, "Largest HTML page, in KB (1,000 bytes), that the audit "
           "accepts; shared assets are not counted (the browser loads them once).",
           check=_positive),
)
SOURCES = (
    Option("trees", str, "trees.nex", "Newick or NEXUS: one tree, or a posterior sample."),
    Option("summary", str, "", "Optional summary tree; otherwise computed from the sample."),
    Option("matrix", str, "matrix.csv", "Trait matrix: CSV, or a NEXUS DATA/CHARACTERS block."),
    Option("evidence", str, "", "Optional long table object,character,state,source,note."),
    Option("gazetteer", str, "places.csv", "Places: CSV or GeoJSON."),
    Option("objects", str, "objects", "Folder of object notes (Markdown)."),
    Option("characters", str, "characters", "Folder of character notes, or a CSV table."),
    Option("clades", str, "clades", "Folder of clade notes."),
    Option("pages", str, "pages", "Folder of free pages."),
    Option("media", str, "media", "Folder of images."),
    Option("rules", str, "", "Optional coherence rules between characters (TOML)."),
    Option("contacts", str, "", "Optional declared borrowing between lineages (CSV)."),
    Option("basemap", str, "", "Optional GeoJSON outline of the study region."),
    Option("names", str, "exact", "How matrix rows and gazetteer ids are matched to tree tips: "
           "exactly, or loosely (ignoring case, spaces, dots, hyphens and underscores).",
           choices=("exact", "loose")),
)
ANALYSIS = (
    Option("burnin", (int, float), 0.25, "Fraction of the sample dropped from its start.",
           check=_fraction),
    Option("thin", int, 1, "Keep every n-th tree after burn-in.", check=_positive),
    Option("outgroup", list, [], "Object ids that root the tree.", check=_string_list),
    Option("summary", str, "majority", "Summary tree: majority-rule consensus or MCC.",
           choices=("majority", "mcc")),
    Option("model", str, "mk", "Likelihood model: equal rates or separate gain and loss.",
           choices=("mk", "mk-gain-loss")),
    Option("rates", str, "gamma4", "Among-character rate variation.",
           choices=("equal", "gamma4")),
    Option("seed", int, 1, "Seed for every random step."),
    Option("ancestral_trees", int, 250, "At most this many sampled trees, evenly spaced, are "
           "used to average ancestral states over the sample (0: every tree).",
           check=lambda v: "" if v >= 0 else "must be 0 or more"),
)
PROFILE = (
    Option("access", list, ["public"], "Access levels this profile publishes.",
           check=_access_list),
    Option("kiosk", bool, False, "Touch-friendly, idle return to start, no outside links."),
    Option("idle_seconds", int, 120, "Kiosk: seconds before the quiet return to the start.",
           check=_positive),
)
COLUMN_TABLES = ("gazetteer", "characters", "evidence", "matrix")


@dataclass(frozen=True)
class Profile:
    name: str
    access: tuple[str, ...]
    kiosk: bool = False
    idle_seconds: int = 120


@dataclass(frozen=True)
class Config:
    """The validated contents of atlas.toml."""

    root: Path
    title: str
    subtitle: str
    languages: tuple[str, ...]
    licence: str
    theme: str
    authors: tuple[str, ...]
    base_url: str
    credits: tuple[str, ...]
    sources: dict[str, str]
    analysis: dict[str, Any]
    columns: dict[str, dict[str, str]]
    profiles: dict[str, Profile] = field(default_factory=dict)
    cache: bool = True  # keep the on-disk build cache in <root>/.atlas-cache/
    page_budget: int = 60  # KB per HTML page, checked by the audit

    @property
    def file(self) -> Path:
        return self.root / CONFIG_NAME

    def path(self, source: str) -> Path | None:
        """The absolute path of a ``[sources]`` entry, or None when it is switched off."""
        value = self.sources[source]
        return (self.root / value) if value else None

    def profile(self, name: str) -> Profile:
        if name not in self.profiles:
            hint = did_you_mean(name, self.profiles) or "known: " + ", ".join(sorted(self.profiles))
            raise AtlasError(
                _problem(self.file, None, f"no build profile named {name!r}", hint)
            )
        return self.profiles[name]


DEFAULT_PROFILES = {
    "public": {"access": ["public"]},
    "community": {"access": ["public", "community"]},
    "kiosk": {"access": ["public"], "kiosk": True},
}


def _problem(file: Path, line: int | None, message: str, hint: str = ""):
    from .errors import Problem

    return Problem(str(file), line, message, hint)


def find_line(text: str, key: str, section: str | None = None) -> int | None:
    """The line where ``key = …`` stands (inside ``[section]`` when given), for messages."""
    current = None
    for n, raw in enumerate(text.splitlines(), 1):
        line = raw.strip()
        header = re.match(r"\[+\s*([^\]]+?)\s*\]+", line)
        if header:
            current = header.group(1)
            if section is not None and current == section and key == "":
                return n
            continue
        if re.match(rf'"?{re.escape(key)}"?\s*=', line) and (section is None or current == section):
            return n
    return None


def _read_table(
    table: dict, options: tuple[Option, ...], section: str, text: str, file: Path,
    problems: Problems,
) -> dict[str, Any]:
    known = {o.key: o for o in options}
    out: dict[str, Any] = {}
    label = f"[{section}] " if section else ""
    for key in table:
        if key not in known:
            problems.error(
                file, find_line(text, key, section or None), f"unknown key {label}{key!r}",
                did_you_mean(key, known) or "known: " + ", ".join(known),
            )
    for o in options:
        if o.key not in table:
            if o.default is None:
                problems.error(file, None, f"{label}{o.key!r} is required: {o.doc}")
            out[o.key] = o.default
            continue
        value = table[o.key]
        line = find_line(text, o.key, section or None)
        if isinstance(value, bool) and o.kind is not bool and bool not in _as_tuple(o.kind):
            ok = False
        else:
            ok = isinstance(value, o.kind)
        if not ok:
            problems.error(
                file, line,
                f"{label}{o.key} must be {_kind_name(o.kind)}, not {_kind_name(type(value))} "
                f"({value!r})",
            )
            out[o.key] = o.default
            continue
        if o.choices and value not in o.choices:
            problems.error(
                file, line, f"{label}{o.key} = {value!r} is not one of "
                + ", ".join(repr(c) for c in o.choices),
                did_you_mean(str(value), [str(c) for c in o.choices]),
            )
            out[o.key] = o.default
            continue
        message = o.check(value) if o.check else ""
        if message:
            problems.error(file, line, f"{label}{o.key} {message}")
            out[o.key] = o.default
            continue
        out[o.key] = value
    return out


def _as_tuple(kind) -> tuple:
    return kind if isinstance(kind, tuple) else (kind,)


def _kind_name(kind) -> str:
    names = {str: "a string", int: "a whole number", float: "a number", bool: "true or false",
             list: "a list", dict: "a table"}
    return " or ".join(names.get(k, k.__name__) for k in _as_tuple(kind))


def load_config(root: Path | str) -> Config:
    """Read and validate ``root/atlas.toml``; raise one AtlasError listing every problem."""
    root = Path(root)
    file = root / CONFIG_NAME
    if not root.is_dir():
        raise AtlasError(_problem(root, None, "no such atlas folder"))
    if not file.is_file():
        raise AtlasError(_problem(file, None, "missing: every atlas folder needs an atlas.toml",
                                  "create one with `atlas new DIR`"))
    raw = file.read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise AtlasError(_problem(file, line, "is not UTF-8 text")) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        match = re.search(r"line (\d+)", str(exc))
        raise AtlasError(_problem(file, int(match.group(1)) if match else None,
                                  f"is not valid TOML: {exc}")) from None

    problems = Problems()
    sections = {"sources": SOURCES, "analysis": ANALYSIS}
    top_table = {k: v for k, v in data.items() if k not in (*sections, "profiles", "columns")}
    top = _read_table(top_table, TOP, "", text, file, problems)
    parts: dict[str, dict[str, Any]] = {}
    for name, options in sections.items():
        table = data.get(name, {})
        if not isinstance(table, dict):
            problems.error(file, find_line(text, name), f"{name} must be a table ([{name}])")
            table = {}
        parts[name] = _read_table(table, options, name, text, file, problems)
    for key in ("trees", "matrix"):
        if not parts["sources"][key]:
            problems.error(file, find_line(text, key, "sources"),
                           f"[sources] {key} must name a file")
    for key, value in parts["sources"].items():
        if key != "names" and value and Path(value).is_absolute():
            problems.error(file, find_line(text, key, "sources"),
                           f"[sources] {key} = {value!r} must be a path relative to the atlas "
                           "folder", "so the folder can be moved and shared")

    columns: dict[str, dict[str, str]] = {}
    raw_columns = data.get("columns", {})
    if not isinstance(raw_columns, dict):
        problems.error(file, find_line(text, "columns"), "columns must be a table ([columns])")
        raw_columns = {}
    for table_name, mapping in raw_columns.items():
        line = find_line(text, table_name, "columns")
        if table_name not in COLUMN_TABLES:
            problems.error(file, line, f"unknown table [columns] {table_name!r}",
                           did_you_mean(table_name, COLUMN_TABLES))
            continue
        if not isinstance(mapping, dict) or not all(
            isinstance(k, str) and isinstance(v, str) for k, v in mapping.items()
        ):
            problems.error(file, line, f"[columns] {table_name} must map our keys to column names")
            continue
        columns[table_name] = dict(mapping)

    profiles: dict[str, Profile] = {}
    raw_profiles = data.get("profiles", DEFAULT_PROFILES)
    if not isinstance(raw_profiles, dict):
        problems.error(file, find_line(text, "profiles"), "profiles must be a table")
        raw_profiles = DEFAULT_PROFILES
    for name in sorted(set(raw_profiles) | {"public"}):
        table = raw_profiles.get(name, DEFAULT_PROFILES.get(name, {}))
        if not isinstance(table, dict):
            problems.error(file, find_line(text, name), f"profile {name!r} must be a table")
            continue
        values = _read_table(table, PROFILE, f"profiles.{name}", text, file, problems)
        profiles[name] = Profile(name, tuple(values["access"]), values["kiosk"],
                                 values["idle_seconds"])

    outgroup = parts["analysis"]["outgroup"]
    if len(set(outgroup)) != len(outgroup):
        problems.error(file, find_line(text, "outgroup", "analysis"),
                       "[analysis] outgroup names an object twice")
    problems.raise_if_any()
    return Config(
        root=root.resolve(),
        title=top["title"].strip(),
        subtitle=top["subtitle"],
        languages=tuple(top["languages"]),
        licence=top["licence"],
        theme=top["theme"],
        authors=tuple(top["authors"]),
        base_url=top["base_url"],
        credits=tuple(top["credits"]),
        sources=parts["sources"],
        analysis={**parts["analysis"], "burnin": float(parts["analysis"]["burnin"]),
                  "outgroup": tuple(outgroup)},
        columns=columns,
        profiles=profiles,
        cache=top["cache"],
        page_budget=top["page_budget"],
    )

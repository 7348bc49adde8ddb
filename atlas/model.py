"""The linked, validated atlas: what every stage after ``link`` may trust.

Everything here has been cross-checked: every object is a tip of the trees, every character
is a matrix column, every place an object names exists, and what the build profile may not
publish has already been taken out (a withheld object stays in the analysis arrays but has
no title, place, note or images here). Matrix cells are converted once into state-set bitmasks
(bit ``k`` = the character's ``k``-th state) in the rows of ``taxa``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .config import Config, Profile
from .errors import Problem
from .i18n import Translator
from .sources.gazetteer import Place
from .sources.tables import Contact, Rule
from .sources.trees import TreeSample


@dataclass(frozen=True)
class Image:
    file: str  # path inside the media folder
    alt: str
    credit: str
    licence: str
    caption: str = ""


@dataclass(frozen=True)
class Character:
    id: str
    label: str
    group: str
    symbols: tuple[str, ...]  # state symbols; the index is the bit in the masks
    descriptions: tuple[str, ...]  # one per symbol
    ordered: bool
    kind: str  # "discrete" or "continuous"
    body: str = ""  # Markdown
    image: Image | None = None
    column: int = -1  # index into the discrete (or continuous) matrix arrays
    source: str = ""  # file:line where it is described
    # lang -> {"label", "descriptions" (one per symbol, "" where not translated), "body"}:
    # from characters/<id>.<lang>.md or the table's label@<lang> and states@<lang> columns.
    translations: dict[str, dict] = field(default_factory=dict)
    # Set for one language's rendering (atlas.site.languages.localise) where a part is shown
    # untranslated: the language it is written in, for a ``lang`` attribute ("" otherwise).
    fallback_lang: str = ""  # of the label
    body_lang: str = ""  # of the body
    state_langs: tuple[str, ...] = ()  # of each description ((): all translated or default)
    file: str = ""  # the note's file (or the table's), for the untranslated-content report

    def state_lang(self, k: int) -> str:
        """The ``lang`` attribute the description of state ``k`` needs ("" for none)."""
        return self.state_langs[k] if k < len(self.state_langs) else ""

    def describe(self, symbol: str) -> str:
        if symbol in self.symbols:
            return self.descriptions[self.symbols.index(symbol)]
        return symbol


@dataclass(frozen=True)
class ArtObject:
    """An object of the study: a tip of the trees."""

    id: str
    title: str
    taxon: int  # row in the matrix arrays and index in the sample's taxa
    withheld: bool = False  # the profile may not show it: no page, name or place
    place: str | None = None
    place_withheld: bool = False  # a place is recorded but this profile may not show it
    period: str = ""
    community: str = ""
    access: str = "public"
    images: tuple[Image, ...] = ()
    sources: tuple[str, ...] = ()
    body: str = ""
    has_note: bool = False
    has_row: bool = True
    translations: dict[str, dict] = field(default_factory=dict)  # lang -> {title, body}
    # Set for one language's rendering (atlas.site.languages.localise) when the note is shown
    # untranslated: the language its title and body are written in, for a ``lang`` attribute.
    fallback_lang: str = ""
    file: str = ""  # the note's file, for the untranslated-content report


@dataclass(frozen=True)
class CladeNote:
    name: str
    title: str
    members: tuple[str, ...]
    body: str
    file: str
    translations: dict[str, dict] = field(default_factory=dict)  # lang -> {title, body}
    fallback_lang: str = ""  # as for ArtObject


@dataclass(frozen=True)
class Page:
    name: str
    title: str
    body: str
    order: int = 100
    translations: dict[str, dict] = field(default_factory=dict)  # lang -> {title, body}
    fallback_lang: str = ""  # as for ArtObject
    file: str = ""


@dataclass(frozen=True)
class Evidence:
    """One row of the evidence ledger: where a coded cell was read from."""

    state: str
    source: str
    note: str
    file: str
    line: int


@dataclass(frozen=True)
class Atlas:
    config: Config
    profile: Profile
    sample: TreeSample
    summary_input: TreeSample | None  # a summary tree given in the sources, if any
    objects: dict[str, ArtObject]  # by id, every tip (withheld ones too, marked)
    characters: tuple[Character, ...]  # discrete and continuous, in matrix order
    masks: np.ndarray  # uint32 (n_taxa, n_discrete): state sets
    n_states: np.ndarray  # int per discrete character
    ordered: np.ndarray  # bool per discrete character
    continuous: np.ndarray  # float (n_taxa, n_continuous), nan = missing
    cells: tuple[tuple[str, ...], ...]  # the matrix as written, per taxon (empty: no row)
    places: dict[str, Place]
    clade_notes: tuple[CladeNote, ...]
    pages: tuple[Page, ...]
    contacts: tuple[Contact, ...]
    rules: tuple[Rule, ...]
    media: dict[str, Path]  # files from the media folder that pages may show, by name
    basemap: dict | None
    warnings: tuple[Problem, ...] = ()
    withheld_text: tuple[str, ...] = ()  # what the profile withholds, for the leak audit
    # The interface language of one rendering (set per language by atlas.site.languages).
    i18n: Translator = field(default_factory=Translator, compare=False)
    # The evidence ledger, by (object id, character id), for objects the profile shows.
    evidence: dict[tuple[str, str], tuple[Evidence, ...]] = field(default_factory=dict)

    @property
    def taxa(self) -> tuple[str, ...]:
        return self.sample.taxa

    @property
    def discrete(self) -> tuple[Character, ...]:
        return tuple(c for c in self.characters if c.kind == "discrete")

    @property
    def continuous_characters(self) -> tuple[Character, ...]:
        return tuple(c for c in self.characters if c.kind == "continuous")

    def visible_objects(self) -> list[ArtObject]:
        return [o for o in self.objects.values() if not o.withheld]

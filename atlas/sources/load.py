"""The load stage: atlas.toml and every source file, read into raw records.

Nothing is cross-checked here; each reader records its own problems (with file and line) in
one collector, so that a broken tree file and a broken matrix are reported in the same run.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, replace
from pathlib import Path

from ..cache import Cache, file_key
from ..config import Config
from ..errors import AtlasError, Problems
from .evidence import EvidenceTable, check_against_matrix, matrix_from_evidence, read_evidence
from .gazetteer import Place, read_gazetteer
from .matrix import MatrixTable, read_matrix
from .notes import Note, read_notes
from .tables import CharacterRow, Contact, Rule, read_character_table, read_contacts, read_rules
from .text import read_text
from .trees import TreeSample, read_tree_file


@dataclass(frozen=True)
class Sources:
    config: Config
    sample: TreeSample | None
    summary: TreeSample | None
    matrix: MatrixTable | None
    places: list[Place]
    objects: list[Note]
    characters: list[Note]
    character_rows: list[CharacterRow]
    clades: list[Note]
    pages: list[Note]
    contacts: list[Contact]
    rules: list[Rule]
    media: dict[str, Path]
    basemap: dict | None
    evidence: EvidenceTable | None = None


def shown_path(config: Config, key: str) -> str:
    """How a source file is named in messages: its path as written in atlas.toml."""
    return config.sources[key]


def _trees(path: Path, shown: str, problems: Problems, cache: Cache | None = None,
           **kwargs) -> TreeSample | None:
    if not path.is_file():
        problems.error(shown, None, "missing: no such file" if not path.exists()
                       else "is a folder, not a tree file")
        return None
    cache = cache or Cache()
    key = file_key(path, **kwargs) if cache.enabled else ""
    cached = cache.get("trees", key) if cache.enabled else None
    if isinstance(cached, TreeSample):  # read before from the same bytes: 14 s -> 0.2 s for
        return replace(cached, file=shown)  # 2,000 trees of 1,000 tips (make_synthetic)
    try:
        sample = replace(read_tree_file(path, **kwargs), file=shown)
        cache.put("trees", key, sample)
        return sample
    except AtlasError as exc:
        # The reader names the file by its path; messages name it as atlas.toml does.
        problems.extend(
            replace(p, file=shown) if p.file == str(path) else p for p in exc.problems
        )
        return None


def load_sources(config: Config, problems: Problems, cache: Cache | None = None) -> Sources:
    """Read every source named by the config; problems go to ``problems``.

    With a ``cache`` (see :mod:`atlas.cache`), tree files already read from the same bytes
    with the same options are taken from it.
    """
    analysis = config.analysis
    sample = _trees(config.path("trees"), shown_path(config, "trees"), problems, cache,
                    burnin=analysis["burnin"], thin=analysis["thin"])
    summary = None
    if config.sources["summary"]:
        summary = _trees(config.path("summary"), shown_path(config, "summary"), problems, cache)
    evidence = None
    if config.sources["evidence"]:
        path = config.path("evidence")
        if path.is_file():
            evidence = read_evidence(path, shown_path(config, "evidence"), problems,
                                     config.columns.get("evidence"))
        else:
            problems.error(shown_path(config, "evidence"), None, "missing: no such file"
                           if not path.exists() else "is a folder, not an evidence table")
    matrix = None
    matrix_path = config.path("matrix")
    if config.sources["evidence"] and not matrix_path.exists():
        pass  # derived from the evidence below, once the characters' order is known
    elif matrix_path.is_file() or not matrix_path.exists():
        matrix = read_matrix(matrix_path, shown_path(config, "matrix"), problems,
                             config.columns.get("matrix"))
        if matrix is not None and evidence is not None:
            check_against_matrix(evidence, matrix, problems)
    else:
        problems.error(shown_path(config, "matrix"), None, "is a folder, not a matrix file")

    places: list[Place] = []
    gazetteer = config.path("gazetteer")
    if gazetteer is not None and gazetteer.exists():
        places = read_gazetteer(gazetteer, shown_path(config, "gazetteer"), problems,
                                config.columns.get("gazetteer"))
    elif gazetteer is not None and config.sources["gazetteer"] != "places.csv":
        problems.error(shown_path(config, "gazetteer"), None, "missing: no such file")

    langs = config.languages

    def notes(key: str) -> list[Note]:
        folder = config.path(key)
        if folder is None:
            return []
        if folder.exists() and not folder.is_dir():
            if key == "characters":
                return []
            problems.error(shown_path(config, key), None, "must be a folder of Markdown notes")
            return []
        return read_notes(folder, shown_path(config, key), problems, langs)

    character_rows: list[CharacterRow] = []
    characters_path = config.path("characters")
    if characters_path is not None and characters_path.is_file():
        character_rows = read_character_table(characters_path, shown_path(config, "characters"),
                                              problems, config.columns.get("characters"))
        beside = characters_path.with_suffix("")
        character_notes = read_notes(beside, f"{config.sources['characters'][:-4]}", problems,
                                     langs) if beside.is_dir() else []
    else:
        character_notes = notes("characters")

    if evidence is not None and matrix is None and not matrix_path.exists():
        order = tuple(r.id for r in character_rows) or tuple(
            sorted(str(n.meta.get("id", n.stem)) for n in character_notes))
        matrix = matrix_from_evidence(evidence, problems, order)

    contacts: list[Contact] = []
    if config.sources["contacts"]:
        contacts = read_contacts(config.path("contacts"), shown_path(config, "contacts"), problems)
    rules: list[Rule] = []
    if config.sources["rules"]:
        rules = read_rules(config.path("rules"), shown_path(config, "rules"), problems)

    media: dict[str, Path] = {}
    media_dir = config.path("media")
    if media_dir is not None and media_dir.is_dir():
        for path in sorted(media_dir.rglob("*")):
            if path.is_file() and not path.name.startswith("."):
                media[path.relative_to(media_dir).as_posix()] = path

    basemap = None
    if config.sources["basemap"]:
        basemap = _basemap(config.path("basemap"), shown_path(config, "basemap"), problems)

    return Sources(
        config=config, sample=sample, summary=summary, matrix=matrix, places=places,
        objects=notes("objects"), characters=character_notes, character_rows=character_rows,
        clades=notes("clades"), pages=notes("pages"), contacts=contacts, rules=rules,
        media=media, basemap=basemap, evidence=evidence,
    )


def _basemap(path: Path, shown: str, problems: Problems) -> dict | None:
    text = read_text(path, problems, shown)
    if text is None:
        return None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        problems.error(shown, exc.lineno, f"is not valid JSON: {exc.msg}")
        return None
    if not isinstance(data, dict) or data.get("type") != "FeatureCollection":
        problems.error(shown, 1, "must be a GeoJSON FeatureCollection of polygons")
        return None
    return data

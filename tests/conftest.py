"""Shared fixtures: small atlas folders written on the fly (all invented)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from atlas.starter import FILES as STARTER

REPO = Path(__file__).resolve().parent.parent
CONTENT = REPO / "content"
REALDATA = REPO.parent / "shared" / "realdata" / "semitic-kitchen2009"


def write_atlas(folder: Path, files: dict[str, str | bytes]) -> Path:
    """Write an atlas source: ``files`` maps relative paths to text (or bytes)."""
    for name, text in files.items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(text, bytes):
            path.write_bytes(text)
        else:
            path.write_text(text, encoding="utf-8")
    return folder


@pytest.fixture
def starter(tmp_path: Path) -> Path:
    """The starter atlas of ``atlas new`` (invented carved spoons), in a fresh folder."""
    return write_atlas(tmp_path / "starter", dict(STARTER))


@pytest.fixture
def starter_files() -> dict[str, str]:
    return dict(STARTER)


@pytest.fixture(scope="session")
def demo_copy(tmp_path_factory) -> Path:
    """A copy of the committed demo atlas, so tests can never touch the real one."""
    if not (CONTENT / "atlas.toml").is_file():
        pytest.skip("the demo atlas in content/ is not there")
    target = tmp_path_factory.mktemp("demo") / "content"
    shutil.copytree(CONTENT, target)
    return target

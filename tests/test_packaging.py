"""A plain ``pip install .`` ships the themes and the world outlines inside the wheel."""

from __future__ import annotations

import subprocess
import sys
import zipfile

from .conftest import REPO


def test_wheel_carries_themes_and_basemaps(tmp_path):
    result = subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "-q",
         "-w", str(tmp_path), str(REPO)], capture_output=True, text=True, check=False)
    assert result.returncode == 0, result.stderr
    (wheel,) = tmp_path.glob("lineage_atlas-*.whl")
    names = set(zipfile.ZipFile(wheel).namelist())
    for theme_file in (REPO / "themes").rglob("*"):
        if theme_file.is_file() and theme_file.suffix in (".html", ".css", ".js", ".toml"):
            inside = "atlas/themes/" + theme_file.relative_to(REPO / "themes").as_posix()
            assert inside in names, inside
    assert "atlas/basemaps/world_110m.json" in names
    # The interface catalogues: the template and every language's .po (read at run time).
    assert "atlas/locale/atlas.pot" in names
    for po in (REPO / "atlas" / "locale").glob("*/LC_MESSAGES/atlas.po"):
        assert "atlas/" + po.relative_to(REPO / "atlas").as_posix() in names, po
    assert "atlas/locale/fr/LC_MESSAGES/atlas.po" in names
    assert any(n.endswith("entry_points.txt") for n in names)

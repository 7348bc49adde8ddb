"""atlas.toml: the declared schema reports every problem at once, with its line."""

from __future__ import annotations

import pytest

from atlas.config import load_config
from atlas.errors import AtlasError


def _config(tmp_path, text: str):
    (tmp_path / "atlas.toml").write_text(text, encoding="utf-8")
    return load_config(tmp_path)


def test_defaults_follow_the_design(tmp_path):
    config = _config(tmp_path, 'title = "T"\n')
    assert config.sources["trees"] == "trees.nex"
    assert config.sources["matrix"] == "matrix.csv"
    assert config.analysis["burnin"] == 0.25
    assert config.analysis["summary"] == "majority"
    assert set(config.profiles) == {"public", "community", "kiosk"}
    assert config.profiles["kiosk"].kiosk is True
    assert config.profiles["community"].access == ("public", "community")


def test_every_problem_is_listed_with_its_line(tmp_path):
    text = (
        'title = 3\n'                       # line 1: wrong type
        'languages = ["en"]\n'
        'colour = "blue"\n'                  # line 3: unknown key
        '[analysis]\n'
        'burnin = 1.5\n'                     # line 5: out of range
        'summary = "majority-rule"\n'        # line 6: not a choice
        'outgroup = "lamp-01"\n'             # line 7: wrong type
        '[profiles.public]\n'
        'access = ["public", "secret"]\n'    # line 9: unknown access level
    )
    with pytest.raises(AtlasError) as info:
        _config(tmp_path, text)
    lines = {(p.line, p.message.split(" ")[0]) for p in info.value.problems}
    messages = "\n".join(p.format() for p in info.value.problems)
    assert len(info.value.problems) == 6, messages
    assert (1, "title") in lines
    assert any(p.line == 3 and "unknown key" in p.message for p in info.value.problems)
    assert any(p.line == 5 and "burnin" in p.message for p in info.value.problems)
    assert any(p.line == 6 and "'majority'" in p.message for p in info.value.problems)
    assert any(p.line == 7 and "must be a list" in p.message for p in info.value.problems)
    assert any(p.line == 9 and "secret" in p.message for p in info.value.problems)


def test_near_miss_keys_get_a_suggestion(tmp_path):
    with pytest.raises(AtlasError) as info:
        _config(tmp_path, 'title = "T"\n[sources]\ntress = "t.nex"\n')
    (problem,) = info.value.problems
    assert problem.line == 3 and "did you mean trees?" in problem.hint


def test_broken_toml_names_the_line(tmp_path):
    with pytest.raises(AtlasError) as info:
        _config(tmp_path, 'title = "T"\n[analysis\nburnin = 0.1\n')
    assert info.value.problems[0].line == 2


def test_paths_are_relative_to_the_atlas(tmp_path):
    with pytest.raises(AtlasError) as info:
        _config(tmp_path, 'title = "T"\n[sources]\nmatrix = "/etc/passwd"\n')
    assert "relative to the atlas folder" in info.value.problems[0].message
    config = _config(tmp_path, 'title = "T"\n[sources]\nmatrix = "../shared/m.nex"\n')
    assert config.path("matrix") == config.root / "../shared/m.nex"


def test_missing_config_and_unknown_profile(tmp_path):
    with pytest.raises(AtlasError, match="needs an atlas.toml"):
        load_config(tmp_path)
    config = _config(tmp_path, 'title = "T"\n')
    with pytest.raises(AtlasError) as info:
        config.profile("comunity")
    assert "did you mean community?" in info.value.problems[0].hint

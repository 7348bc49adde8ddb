"""The command line: exit codes 0 / 1 / 2, messages as file:line, never a traceback."""

from __future__ import annotations

import json
import subprocess
import sys

from click.testing import CliRunner

from atlas.cli import main


def run(*args: str):
    return CliRunner().invoke(main, list(args), catch_exceptions=False)


def test_new_then_check_then_build(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    result = run("new", "mine")
    assert result.exit_code == 0, result.output
    assert (tmp_path / "mine" / "atlas.toml").is_file()
    result = run("check", "mine")
    assert result.exit_code == 0 and "OK: 6 objects" in result.output
    result = run("build", "mine", "--out", "site")
    assert result.exit_code == 0, result.output
    assert (tmp_path / "site" / "index.html").is_file()
    assert run("new", "mine").exit_code == 1  # not empty: refused, nothing overwritten


def test_input_problems_exit_1_with_file_and_line(starter, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (starter / "matrix.csv").write_text("object,bowl\nspoon-a,0\nspoon-a,1\n", encoding="utf-8")
    result = run("check", str(starter))
    assert result.exit_code == 1
    assert "matrix.csv:3: object 'spoon-a' has two rows (first at line 2)" in result.output
    assert "Traceback" not in result.output


def test_usage_errors_exit_2(tmp_path):
    assert run("build", "--profile").exit_code == 2
    assert run("frobnicate").exit_code == 2
    assert run("stats", "--format", "xml").exit_code == 2


def test_unknown_profile_is_an_input_problem(starter):
    result = run("check", str(starter), "--profile", "comunity")
    assert result.exit_code == 1 and "did you mean community?" in result.output


def test_stats_json_has_the_documented_keys(starter):
    result = run("stats", str(starter), "--format", "json")
    assert result.exit_code == 0, result.output
    stats = json.loads(result.output)
    for key in ("trees", "taxa", "characters", "summary", "clades", "parsimony", "by_character",
                "model", "nodes"):
        assert key in stats
    assert stats["trees"] == {"file": "trees.nex", "read": 4, "used": 3, "burnin": 1, "thin": 1}
    assert stats["taxa"] == 6
    result = run("stats", str(starter))
    assert result.exit_code == 0 and "Parsimony length" in result.output


def test_python_dash_m_runs_the_same_command(tmp_path):
    result = subprocess.run([sys.executable, "-m", "atlas", "--help"], capture_output=True,
                            text=True, cwd=tmp_path, check=False)
    assert result.returncode == 0 and "atlas" in result.stdout and "build" in result.stdout


def test_preview_serves_once(starter, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    result = run("preview", str(starter), "--out", "site", "--port", "0", "--once")
    assert result.exit_code == 0, result.output
    assert "Serving http://127.0.0.1:" in result.output


def test_preview_rebuilds_when_a_source_changes(starter, tmp_path):
    import threading

    from atlas.preview import serve

    said: list[str] = []
    note = starter / "pages" / "about.md"

    def edit() -> None:  # after the first build, while the preview waits for changes
        while not any(m.startswith("Serving") for m in said):
            threading.Event().wait(0.05)
        note.write_text(note.read_text(encoding="utf-8") + "\nA new line (invented).\n",
                        encoding="utf-8")

    editor = threading.Thread(target=edit)
    editor.start()
    serve(starter, tmp_path / "site", "public", 0, once=True, say=said.append, poll=1.5)
    editor.join()
    assert "Source changed; rebuilding." in said
    assert sum(m.startswith("Built") for m in said) == 2  # the first build and the rebuild
    assert "A new line (invented)." in (tmp_path / "site" / "pages" / "about.html").read_text()

"""The README's quick start, followed exactly on a clean clone in a fresh virtual
environment (part of the default run, so CI checks a clean install on every submission;
about 1.5 minutes once pip's cache holds the wheels the test command just installed)."""

import os
import re
import subprocess
import sys
from pathlib import Path

from .conftest import REPO


def readme_commands() -> list[str]:
    text = (REPO / "README.md").read_text()
    quick = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return [c.strip() for c in re.findall(r"```\n(.*?)\n```", quick, flags=re.S)]


def test_readme_has_two_commands_and_ci_runs_the_second():
    commands = readme_commands()
    assert len(commands) == 2
    assert "blockmodel run demo_drillholes/project.toml" in commands[0]
    ci = (REPO / ".ci" / "run").read_text()
    assert commands[1] in ci


def test_quick_start_on_a_fresh_environment(tmp_path):
    clone = tmp_path / "clone"
    subprocess.run(["git", "clone", "-q", str(REPO), str(clone)], check=True)
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True)
    env = {
        **os.environ,
        "PATH": f"{venv / 'bin'}{os.pathsep}{os.environ['PATH']}",
        "VIRTUAL_ENV": str(venv),
    }
    run = readme_commands()[0]
    done = subprocess.run(
        run, shell=True, cwd=clone, env=env, capture_output=True, text=True, timeout=3000
    )
    assert done.returncode == 0, done.stderr[-4000:]
    report = Path(clone) / "reports" / "demo"
    for name in ("report.html", "block_model.parquet", "grade_tonnage.csv", "manifest.json"):
        assert (report / name).is_file()


def test_readme_table_of_keys_is_made_from_the_declarations():
    """Each setting is declared once; the README's table of keys must be the one made
    from those declarations (regenerate: python3 -m blockmodel.config.schema README.md)."""
    from blockmodel.config.schema import with_table

    text = (REPO / "README.md").read_text(encoding="utf-8")
    assert with_table(text) == text, "run: python3 -m blockmodel.config.schema README.md"


def test_notebook_example_runs(box_project, capsys):
    """The README's notebook example runs as written (on the box project, for time)."""
    text = (REPO / "README.md").read_text(encoding="utf-8")
    section = text.split("## In a notebook", 1)[1].split("\n## ", 1)[0]
    (code,) = re.findall(r"```python\n(.*?)\n```", section, flags=re.S)
    assert "demo_drillholes/project.toml" in code
    exec(code.replace("demo_drillholes/project.toml", str(box_project)), {})
    out = capsys.readouterr().out
    assert "Measured + Indicated" in out or "Total" in out
    assert "estimate" in out

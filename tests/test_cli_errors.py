"""Bad input at the command line: exit status 2, one clear message, no traceback, nothing written."""

import subprocess
import sys

import pytest

from blockmodel.app.cli import main


def _run(*args):
    return subprocess.run(
        [sys.executable, "-m", "blockmodel", *map(str, args)],
        capture_output=True,
        text=True,
        timeout=120,
    )


def test_check_prints_summary(small_project):
    r = _run("check", small_project)
    assert r.returncode == 0, r.stderr
    assert "Holes: 3" in r.stdout and "gap in sampling" in r.stdout


def test_bad_data_exit_2_no_traceback_nothing_written(small_project):
    a = small_project.parent / "assays.csv"
    a.write_text(a.read_text().replace("A1,4,6,2.5", "A1,4,6,oops"))
    r = _run("run", small_project)
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    assert "assays.csv" in r.stderr and "A1" in r.stderr and "  4  " in r.stderr
    assert not (small_project.parent / "out").exists()
    assert not list(small_project.parent.glob(".out*"))


@pytest.mark.parametrize("command", ["check", "run", "variography"])
def test_missing_project_file(tmp_path, command, capsys):
    assert main([command, str(tmp_path / "nope.toml")]) == 2
    assert "project file not found" in capsys.readouterr().err


def test_unwritable_output_folder(small_project, tmp_path, capsys):
    # a folder under a plain file can never be created (a read-only folder behaves the same
    # for users other than root)
    blocker = tmp_path / "a_file"
    blocker.write_text("not a folder")
    assert main(["run", str(small_project), "--out", str(blocker / "report")]) == 2
    assert "cannot write the report folder" in capsys.readouterr().err


def test_help_on_every_command():
    for cmd in (
        "check",
        "run",
        "variography",
        "neighbourhood",
        "report",
        "export",
        "view",
        "bench",
        "make-demo",
    ):
        r = _run(cmd, "--help")
        assert r.returncode == 0 and "usage" in r.stdout

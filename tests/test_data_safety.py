"""Nothing the tool did not write is ever deleted or overwritten.

Each case below once destroyed a user's files; each now asserts that every file that was
there before the command is still there, byte for byte, and that the command said why it
stopped (exit status 2, no traceback).
"""

from __future__ import annotations

import hashlib
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from blockmodel.app.cli import main
from blockmodel.app.outputs import MARKER, is_tool_folder


def _snapshot(folder: Path) -> dict[str, str]:
    """Every file below ``folder`` (hidden ones too) with its SHA-256."""
    out = {}
    for root, _, files in os.walk(folder):
        for f in files:
            p = Path(root) / f
            out[str(p.relative_to(folder))] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


def _refused(args: list[str], capsys, *words: str) -> str:
    assert main(args) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    for w in words:
        assert w in err, err
    return err


@pytest.fixture
def work(box_site, tmp_path):
    """A private copy of the workspace for a test that changes things."""
    shutil.copytree(box_site, tmp_path / "w", symlinks=True)
    return tmp_path / "w"


@pytest.mark.parametrize("where", ["data", ".", "parent", "link"])
def test_run_never_writes_over_the_inputs(work, capsys, monkeypatch, where):
    before = _snapshot(work)
    data = work / "data"
    if where == "link":
        (work / "link").symlink_to(data, target_is_directory=True)
        before = _snapshot(work)
    out = {"data": data, ".": Path("."), "parent": work, "link": work / "link"}[where]
    monkeypatch.chdir(data)
    _refused(["run", str(data / "project.toml"), "--out", str(out)], capsys, "input file")
    assert _snapshot(work) == before


def test_report_folder_dot_in_project_file(work, capsys):
    project = work / "data" / "project.toml"
    project.write_text(project.read_text().replace('folder = "out"', 'folder = "."'))
    before = _snapshot(work)
    _refused(["run", str(project)], capsys, "input file")
    assert _snapshot(work) == before


def test_variography_never_writes_over_the_data(work, capsys):
    before = _snapshot(work)
    _refused(
        ["variography", str(work / "data" / "project.toml"), "--out", str(work / "data")],
        capsys,
        "input file",
    )
    assert _snapshot(work) == before


def test_folder_with_the_users_files_is_refused(work, capsys):
    (work / "notes").mkdir()
    (work / "notes" / "notes.txt").write_text("my field notes\n")
    before = _snapshot(work)
    _refused(
        ["run", str(work / "data" / "project.toml"), "--out", str(work / "notes")],
        capsys,
        "notes.txt",
        "--replace",
    )
    assert _snapshot(work) == before


def test_out_naming_an_existing_file_is_refused(work, capsys):
    (work / "results.txt").write_text("keep me\n")
    before = _snapshot(work)
    _refused(
        ["run", str(work / "data" / "project.toml"), "--out", str(work / "results.txt")],
        capsys,
        "not a folder",
    )
    assert _snapshot(work) == before


def test_report_never_removes_the_block_model_it_reads(work, capsys):
    before = _snapshot(work)
    out = work / "out"
    _refused(
        [
            "report",
            str(work / "data" / "project.toml"),
            str(out / "block_model.parquet"),
            "--out",
            str(out),
        ],
        capsys,
        "block_model.parquet",
    )
    assert _snapshot(work) == before


def test_a_file_added_to_a_report_folder_makes_it_the_users(work, capsys):
    (work / "out" / "review.docx").write_bytes(b"reviewer's comments")
    before = _snapshot(work)
    _refused(
        ["run", str(work / "data" / "project.toml"), "--out", str(work / "out")],
        capsys,
        "review.docx",
    )
    assert _snapshot(work) == before


def test_replace_adds_the_report_and_keeps_the_users_files(work, capsys):
    notes = work / "notes"
    notes.mkdir()
    (notes / "notes.txt").write_text("my field notes\n")
    (notes / "sub").mkdir()
    (notes / "sub" / "photo.jpg").write_bytes(b"\xff\xd8 not really a photo")
    mine = _snapshot(notes)
    args = [
        "report",
        str(work / "data" / "project.toml"),
        str(work / "out" / "block_model.parquet"),
        "--out",
        str(notes),
    ]
    _refused(args, capsys, "--replace")
    assert main([*args, "--replace"]) == 0
    after = _snapshot(notes)
    assert {k: after[k] for k in mine} == mine
    assert {"report.html", "grade_tonnage.csv", "manifest.json"} <= set(after)
    assert not is_tool_folder(notes)  # still the user's folder, holding the tool's files
    # again with --replace: the tool's files are renewed, the user's kept
    assert main([*args, "--replace", "--cutoffs", "0.0", "1.0"]) == 0
    again = _snapshot(notes)
    assert {k: again[k] for k in mine} == mine
    assert set(again) == set(after)
    capsys.readouterr()


def test_replace_never_overwrites_a_users_file_of_the_same_name(work, capsys):
    notes = work / "notes"
    notes.mkdir()
    (notes / "report.html").write_text("<p>my own report</p>")
    before = _snapshot(work)
    args = [
        "report",
        str(work / "data" / "project.toml"),
        str(work / "out" / "block_model.parquet"),
        "--out",
        str(notes),
        "--replace",
    ]
    _refused(args, capsys, "report.html")
    assert _snapshot(work) == before
    assert not list(work.glob(".notes.*"))


def test_the_tools_own_folder_is_replaced(work, capsys):
    args = [
        "report",
        str(work / "data" / "project.toml"),
        str(work / "out" / "block_model.parquet"),
        "--out",
        str(work / "again"),
    ]
    assert main(args) == 0
    assert main([*args, "--cutoffs", "0.0", "2.0"]) == 0
    assert is_tool_folder(work / "again")
    assert not list(work.glob(".again.*"))
    capsys.readouterr()


def test_make_demo_never_overwrites(tmp_path, capsys):
    (tmp_path / "collars.csv").write_text("hole_id,x,y,z,depth\nMY1,0,0,0,10\n")
    before = _snapshot(tmp_path)
    _refused(["make-demo", str(tmp_path)], capsys, "collars.csv", "not overwritten")
    assert _snapshot(tmp_path) == before


def test_view_never_overwrites_an_input_or_a_users_image(work, capsys):
    data = work / "data"
    model = work / "out" / "block_model.parquet"
    (work / "photo.png").write_bytes((work / "out" / "plan.png").read_bytes()[:100] + b"mine")
    before = _snapshot(work)
    for target, word in ((data / "collars.csv", "input"), (work / "photo.png", "not written")):
        _refused(
            [
                "view",
                str(data / "project.toml"),
                str(model),
                "--kind",
                "plan",
                "--png",
                str(target),
            ],
            capsys,
            word,
        )
    assert _snapshot(work) == before
    # an image the tool wrote may be written again
    png = work / "plan.png"
    view = ["view", str(data / "project.toml"), str(model), "--kind", "plan", "--png", str(png)]
    assert main(view) == 0
    assert main(view) == 0
    capsys.readouterr()


def _dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def test_kill_between_the_two_renames_is_recovered(work, capsys):
    """A run killed after setting the old report aside and before moving the new one in
    leaves ``.out.old-PID``; the next command, even one that stops on bad input, puts the
    old report back and clears only the tool's own staging folders."""
    pid = _dead_pid()
    out = work / "out"
    report = _snapshot(out)
    os.replace(out, work / f".out.old-{pid}")
    staged = work / f".out.partial-{pid}-abc"
    staged.mkdir()
    (staged / ".blockmodel-staging").write_text(str(pid))
    (staged / "composites.csv").write_text("half")
    lookalike = work / f".out.partial-{pid}-mine"  # the user's folder with a similar name
    lookalike.mkdir()
    (lookalike / "keep.txt").write_text("keep")
    _refused(
        [
            "report",
            str(work / "data" / "project.toml"),
            str(work / "missing.parquet"),
            "--out",
            str(out),
        ],
        capsys,
        "missing.parquet",
        "restored",
    )
    # the bad input was found after recovery: the old report is back, byte for byte
    assert _snapshot(out) == report
    assert not staged.exists()
    assert (lookalike / "keep.txt").read_text() == "keep"


def test_a_set_aside_folder_that_is_not_the_tools_is_kept(work, capsys):
    pid = _dead_pid()
    aside = work / f".out.old-{pid}"
    aside.mkdir()
    (aside / "thesis.tex").write_text("chapter 1")
    args = [
        "report",
        str(work / "data" / "project.toml"),
        str(work / "out" / "block_model.parquet"),
        "--out",
        str(work / "r3"),
    ]
    assert main(args) == 0
    assert (aside / "thesis.tex").read_text() == "chapter 1"
    capsys.readouterr()


def test_manifest_marks_and_lists_the_tools_files(box_site):
    import json

    manifest = json.loads((box_site / "out" / "manifest.json").read_text())
    assert manifest["written_by"] == MARKER
    listed = set(manifest["files"])
    assert listed == {p.name for p in (box_site / "out").iterdir()} - {"manifest.json"}


def test_report_folder_has_the_users_normal_permissions(box_site):
    mask = os.umask(0)
    os.umask(mask)
    assert (box_site / "out").stat().st_mode & 0o777 == 0o777 & ~mask


@pytest.fixture
def small_disk(tmp_path):
    """A 4 MiB tmpfs (root only); skipped where mounting is not allowed."""
    mnt = tmp_path / "disk"
    mnt.mkdir()
    done = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", "size=4m", "tmpfs", str(mnt)], capture_output=True
    )
    if done.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs here: {done.stderr.decode().strip()}")
    yield mnt
    subprocess.run(["umount", "-l", str(mnt)], check=False)


def test_full_disk_keeps_the_previous_report(box_site, small_disk, capsys):
    args = [
        "report",
        str(box_site / "data" / "project.toml"),
        str(box_site / "out" / "block_model.parquet"),
        "--out",
        str(small_disk / "r"),
    ]
    assert main(args) == 0
    before = _snapshot(small_disk / "r")
    free = shutil.disk_usage(small_disk).free
    size = sum((small_disk / "r" / f).stat().st_size for f in before)
    (small_disk / "filler").write_bytes(b"\0" * max(free - size // 3, 0))
    _refused(args, capsys, "disk is full", "unchanged")
    assert _snapshot(small_disk / "r") == before
    assert sorted(p.name for p in small_disk.iterdir()) == ["filler", "r"]

"""Bad input tried as a user would: each fault gives a correct run with a listed warning, or
exit status 2 with one clear message naming file, line, hole or key; never a traceback."""

import pandas as pd
import pytest

from blockmodel.app.cli import main


def _edit(path, old, new, count=1):
    text = path.read_text()
    assert old in text, old
    path.write_text(text.replace(old, new, count))


def _set_assays(folder, transform):
    a = pd.read_csv(folder / "assays.csv", dtype=str)
    transform(a)
    a.to_csv(folder / "assays.csv", index=False)


# (id, how to break it, expected exit, words that must appear in the message)
def _faults():
    p, c, s, a = "project.toml", "collars.csv", "surveys.csv", "assays.csv"
    return [
        (
            "unknown key",
            (p, "[estimation]", "[estimation]\nbakend = 'serial'"),
            2,
            ["bakend", "did you mean 'backend'"],
        ),
        ("wrong type", (p, "lags = 8", "lags = 'eight'"), 2, ["variography.lags"]),
        (
            "missing file",
            (p, 'solid = "ore.ply"', 'solid = "nothere.ply"'),
            2,
            ["domains.ore.solid", "not found"],
        ),
        (
            "negative block size",
            (p, "block_size = [10.0, 10.0, 10.0]", "block_size = [10.0, -10.0, 10.0]"),
            2,
            ["grid.block_size"],
        ),
        ("zero lag", (p, "lag = 10.0", "lag = 0.0"), 2, ["variography.lag"]),
        (
            "zero search range",
            (p, "ranges = [80.0, 80.0, 40.0]", "ranges = [80.0, 0.0, 40.0]"),
            2,
            ["search[0].ranges"],
        ),
        (
            "unsorted cut-offs",
            (p, "cutoffs = [0.0, 0.5, 1.0]", "cutoffs = [0.0, 1.0, 0.5]"),
            2,
            ["report.cutoffs"],
        ),
        (
            "zero variogram range",
            (
                p,
                "[[search]]",
                "[variogram.ore.cu]\nnugget = 0.1\n[[variogram.ore.cu.structures]]\n"
                "kind = 'spherical'\nsill = 0.5\nranges = [50.0, 0.0, 10.0]\n\n[[search]]",
            ),
            2,
            ["variogram.ore.cu.structures[0].ranges"],
        ),
        (
            "min above max samples",
            (p, "min_samples = 3", "min_samples = 30"),
            2,
            ["search[0]", "min_samples"],
        ),
        ("unknown grade unit", (p, 'cu = "%"', 'cu = "lb/t"'), 2, ["data.grades.cu"]),
        ("duplicate collar", (c, "B01,", "B00,"), 2, ["collars.csv", "B00", "duplicate collar"]),
        (
            "interval without collar",
            (a, "B03,0,2", "Q99,0,2"),
            2,
            ["assays.csv", "Q99", "no collar"],
        ),
        (
            "survey without collar",
            (s, "B03,0,0,-90", "Q98,0,0,-90\nB03,0,0,-90"),
            2,
            ["surveys.csv", "Q98"],
        ),
        (
            "from not below to",
            (a, "B02,10,12", "B02,12,12"),
            2,
            ["assays.csv", "B02", "not less than"],
        ),
        ("overlap", (a, "B02,10,12", "B02,9,12"), 2, ["B02", "overlaps"]),
        ("past the depth", (a, "B02,98,100", "B02,98,104"), 2, ["B02", "past the hole depth"]),
        (
            "surveys unsorted",
            (s, "B04,0,0,-90", "B04,0,0,-90\nB04,50,0,-89\nB04,20,0,-89"),
            2,
            ["B04", "increasing"],
        ),
        (
            "survey depth twice",
            (s, "B04,0,0,-90", "B04,0,0,-90\nB04,0,0,-89"),
            2,
            ["B04", "duplicated survey depth"],
        ),
        ("azimuth 400", (s, "B05,0,0,-90", "B05,0,400,-90"), 2, ["B05", "azimuth"]),
        ("dip 100", (s, "B05,0,0,-90", "B05,0,0,-100"), 2, ["B05", "dip"]),
        ("text grade", (a, "B06,30,32,", "B06,30,32,abc"), 2, ["B06", "not a number"]),
        ("missing coordinate", (c, "B07,", "B07,,REMOVE"), 2, ["B07", "missing value"]),
        ("negative grade", (a, "B06,30,32,", "B06,30,32,-5"), 2, ["B06", "negative"]),
        ("wrong field count", (a, "B06,30,32,", "B06,30,32,1,2,"), 2, ["assays.csv", "fields"]),
    ]


FAULTS = _faults()


@pytest.mark.parametrize(("label", "edit", "status", "words"), FAULTS, ids=[f[0] for f in FAULTS])
def test_fault(box_project, capsys, label, edit, status, words):
    name, old, new = edit
    if name == "assays.csv" and old.endswith(","):
        # replace the grade of that interval, whatever its value
        def change(frame):
            hole, f, _ = old.split(",", 2)
            row = (frame["hole_id"] == hole) & (frame["from"] == f)
            parts = new.split(",")
            frame.loc[row, "cu"] = ",".join(parts[3:]) if len(parts) > 4 else parts[3]

        if label == "wrong field count":
            text = (box_project.parent / name).read_text().splitlines()
            idx = next(i for i, line in enumerate(text) if line.startswith("B06,30,32,"))
            text[idx] = text[idx] + ",9"
            (box_project.parent / name).write_text("\n".join(text) + "\n")
        else:
            _set_assays(box_project.parent, change)
    elif new.endswith("REMOVE"):  # blank the x coordinate of that collar
        f = box_project.parent / name
        f.write_text(
            "\n".join(
                ",".join([x.split(",")[0], "", *x.split(",")[2:]]) if x.startswith(old) else x
                for x in f.read_text().splitlines()
            )
            + "\n"
        )
    else:
        _edit(box_project.parent / name, old, new)
    code = main(["run", str(box_project)])
    err = capsys.readouterr().err
    assert code == status, err
    for w in words:
        assert w in err, (w, err)
    assert "Traceback" not in err
    assert not (box_project.parent / "out").exists()


@pytest.mark.parametrize(
    ("content", "words"),
    [
        (b"", "empty"),
        (b"hole_id,from,to,cu,domain\n", "no rows"),
        (b"hole_id;from;to;cu;domain\nB00;0;2;1;ore\n", "commas"),
        (b"hole_id,from,from,cu,domain\nB00,0,2,1,ore\n", "more than once"),
        (b"hole_id,from,to,cu,domain\nB00,0,2,\xe91,ore\n", "UTF-8"),
        (b"hole_id,from,to,au,domain\nB00,0,2,1,ore\n", "missing column 'cu'"),
    ],
    ids=[
        "empty",
        "header only",
        "semicolons",
        "duplicated header",
        "latin-1 byte",
        "no grade column",
    ],
)
def test_unreadable_assays(box_project, capsys, content, words):
    (box_project.parent / "assays.csv").write_bytes(content)
    assert main(["run", str(box_project)]) == 2
    err = capsys.readouterr().err
    assert words in err and "assays.csv" in err and "Traceback" not in err


def _run_ok(box_project, capsys):
    code = main(["run", str(box_project)])
    err = capsys.readouterr().err
    assert "Traceback" not in err
    return code, err


def test_hole_with_all_grades_missing_warns(box_project, capsys):
    _set_assays(
        box_project.parent, lambda f: f.__setitem__("cu", f["cu"].where(f["hole_id"] != "B03", ""))
    )
    code, err = _run_ok(box_project, capsys)
    assert code == 0, err
    html = (box_project.parent / "out" / "report.html").read_text()
    assert "every grade of this hole is missing" in html


def test_domain_with_no_composites(box_project, capsys):
    _set_assays(box_project.parent, lambda f: f.__setitem__("domain", "waste"))
    code, err = _run_ok(box_project, capsys)
    assert code == 2 and "domain 'ore'" in err and "no composites" in err


def test_all_grades_equal(box_project, capsys):
    _set_assays(box_project.parent, lambda f: f.__setitem__("cu", "1.5"))
    code, err = _run_ok(box_project, capsys)
    assert code == 2, err
    assert "ore.cu" in err and "all grades equal" in err and "[variogram.ore.cu]" in err


def test_one_hole_only(box_project, capsys):
    for name in ("collars.csv", "surveys.csv"):
        f = box_project.parent / name
        lines = f.read_text().splitlines()
        f.write_text("\n".join([lines[0]] + [x for x in lines[1:] if x.startswith("B00,")]) + "\n")
    a = pd.read_csv(box_project.parent / "assays.csv", dtype=str)
    a[a["hole_id"] == "B00"].to_csv(box_project.parent / "assays.csv", index=False)
    code, err = _run_ok(box_project, capsys)
    # one hole has no spacing for the declustering cell (equal weights, said on the way)
    # and cannot show directions of continuity: the run stops and says what to give
    assert "declustering of domain 'ore'" in err and "one hole" in err
    assert code == 2, err
    assert "variography.orientation" in err and "cannot find the orientation" in err


def test_collinear_holes(box_project, capsys):
    f = box_project.parent / "collars.csv"
    lines = f.read_text().splitlines()
    out = [lines[0]]
    for n, line in enumerate(lines[1:]):
        hole, _, _, *rest = line.split(",")
        out.append(",".join([hole, f"{5 + 6 * n}", "50", *rest]))
    f.write_text("\n".join(out) + "\n")
    code, err = _run_ok(box_project, capsys)
    # the grades are independent draws: the run completes and says the model does not
    # predict the samples it leaves out
    assert code == 0, err
    assert "does not predict" in err
    gt = pd.read_csv(box_project.parent / "out" / "grade_tonnage.csv")
    assert gt["tonnes"].notna().all() and gt["metal"].notna().all()
    assert (gt["grade"].notna() | (gt["tonnes"] == 0)).all()


def test_clean_box_project_runs(box_project, capsys):
    code, err = _run_ok(box_project, capsys)
    assert code == 0, err
    gt = pd.read_csv(box_project.parent / "out" / "grade_tonnage.csv")
    assert set(gt["metal_unit"]) == {"t"}

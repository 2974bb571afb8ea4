"""The statement table: classes in confidence order with Measured + Indicated, totals equal
to the grade–tonnage table at the reporting cut-off, rounding without false decimals, and
the spreadsheet holding the same numbers."""

import numpy as np
import pandas as pd
import pytest

from blockmodel.report.tables import (
    grade_tonnage,
    grade_tonnage_pivot,
    round_significant,
    rounded_statement,
    statement,
)


@pytest.fixture
def blocks(rng):
    n = 400
    return pd.DataFrame(
        {
            "domain": rng.choice(["lode", "halo"], n),
            "class": rng.choice(["Inferred", "Indicated", "Measured"], n),
            "tonnes": rng.uniform(500, 2000, n),
            "au": rng.lognormal(0, 1, n),
        }
    )


def test_statement_totals_equal_the_grade_tonnage_table(blocks):
    gt = grade_tonnage(blocks, "au", "g/t", [0.0, 0.5, 1.0])
    st = statement(gt, "g/t", {"lode": 0.5, "halo": 1.0})
    oz = gt[gt["metal_unit"] == "troy oz"]
    for domain, cut in (("lode", 0.5), ("halo", 1.0)):
        mine = st[st["domain"] == domain].set_index("class")
        assert list(mine.index) == [
            "Measured",
            "Indicated",
            "Measured + Indicated",
            "Inferred",
            "Total",
        ]
        ref = oz[(oz["domain"] == domain) & (oz["cutoff"] == cut)].set_index("class")
        for cls in ("Measured", "Indicated", "Inferred"):
            assert mine.loc[cls, "tonnes"] == pytest.approx(ref.loc[cls, "tonnes"], rel=1e-12)
            assert mine.loc[cls, "metal (troy oz)"] == pytest.approx(
                ref.loc[cls, "metal"], rel=1e-12
            )
        assert mine.loc["Total", "tonnes"] == pytest.approx(ref.loc["all", "tonnes"], rel=1e-12)
        assert mine.loc["Total", "grade"] == pytest.approx(ref.loc["all", "grade"], rel=1e-12)
        mi = mine.loc["Measured", "tonnes"] + mine.loc["Indicated", "tonnes"]
        assert mine.loc["Measured + Indicated", "tonnes"] == pytest.approx(mi, rel=1e-12)
        # metal in kilograms is grams per tonne times tonnes over a thousand
        assert mine.loc["Total", "metal (kg)"] == pytest.approx(
            mine.loc["Total", "tonnes"] * mine.loc["Total", "grade"] / 1000, rel=1e-12
        )
    every = st[st["domain"] == "all domains"].set_index("class")
    parts = st[(st["domain"] != "all domains") & (st["class"] == "Total")]
    assert every.loc["Total", "tonnes"] == pytest.approx(parts["tonnes"].sum(), rel=1e-12)


def test_grade_tonnage_classes_in_confidence_order(blocks):
    gt = grade_tonnage(blocks, "au", "g/t", [0.0])
    lode = gt[(gt["domain"] == "lode") & (gt["metal_unit"] == "kg")]
    assert list(lode["class"]) == ["all", "Measured", "Indicated", "Inferred"]


@pytest.mark.parametrize(
    ("value", "finest", "expected"),
    [
        (29.34, 0.0, 29.3),
        (1_234_567.0, 1000.0, 1_230_000.0),
        (4_321.0, 1000.0, 4000.0),
        (0.004567, 0.0, 0.00457),
        (40.0, 0.0, 40.0),
        (0.0, 1000.0, 0.0),
    ],
)
def test_round_significant(value, finest, expected):
    assert round_significant([value], finest=finest)[0] == pytest.approx(expected, rel=1e-12)


def test_no_false_decimals():
    """Small metal was once shown as 0.00 kg (29 kg) and 0.00 t of copper (40 t)."""
    frame = pd.DataFrame(
        {
            "domain": ["halo"],
            "class": ["Total"],
            "cutoff": [0.3],
            "tonnes": [912_345.0],
            "grade": [0.0318],
            "metal (kg)": [29.01],
            "metal (t)": [40.0],
        }
    )
    shown = rounded_statement(frame).iloc[0]
    assert shown["tonnes"] == "912,000" and shown["grade"] == "0.0318"
    assert shown["metal (kg)"] == "29" and shown["metal (t)"] == "40"


def test_pivot_has_cutoff_rows_and_class_columns(blocks):
    gt = grade_tonnage(blocks, "au", "g/t", [0.0, 1.0])
    rows = gt[(gt["domain"] == "lode") & (gt["metal_unit"] == "troy oz")]
    pivot = grade_tonnage_pivot(rows, "g/t", "troy oz")
    assert list(pivot["cut-off (g/t)"]) == ["0", "1"]
    assert list(pivot.columns[1:4]) == [
        "Measured: tonnes (t)",
        "Measured: grade (g/t)",
        "Measured: metal (troy oz)",
    ]
    assert pivot.columns[-1] == "all classes: metal (troy oz)"


def test_run_writes_statement_csv_and_workbook(box_site):
    from openpyxl import load_workbook

    out = box_site / "out"
    csv = pd.read_csv(out / "statement.csv")
    book = load_workbook(out / "statement.xlsx", read_only=True)
    assert book.sheetnames == ["statement cu", "grade-tonnage"]
    rows = list(book["statement cu"].values)
    header, body = rows[0], rows[1:]
    assert "tonnes (t)" in header and "grade (%)" in header and "metal (t)" in header
    sheet = pd.DataFrame(body, columns=header)
    # the CSV keeps ten significant digits, the workbook every digit
    np.testing.assert_allclose(sheet["tonnes (t)"], csv["tonnes"], rtol=1e-9)
    np.testing.assert_allclose(
        sheet["grade (%)"].astype(float), csv["grade"], rtol=1e-9, equal_nan=True
    )
    gt = pd.read_csv(out / "grade_tonnage.csv")
    total = csv[(csv["domain"] == "ore") & (csv["class"] == "Total")].iloc[0]
    ref = gt[(gt["domain"] == "ore") & (gt["class"] == "all") & (gt["cutoff"] == total["cutoff"])]
    assert total["tonnes"] == pytest.approx(ref["tonnes"].iloc[0], rel=1e-9)

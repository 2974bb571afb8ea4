"""Grade-tonnage identities, classification rules and the discrete Gaussian change of support."""

from math import factorial, sqrt

import numpy as np
import pandas as pd
import pytest

from blockmodel.assess.classification import classify_blocks
from blockmodel.assess.support import (
    block_grade_tonnage,
    fit_anamorphosis,
    hermite,
    support_coefficient,
)
from blockmodel.config.sections import ClassRule
from blockmodel.report.tables import grade_tonnage, metal_units, statement

# the international troy ounce, exactly 31.1034768 g (international yard and pound
# agreement, 1959), written out here rather than read from the code under test
TROY_OUNCE_GRAMS = 31.1034768


@pytest.fixture
def blocks(rng):
    n = 600
    return pd.DataFrame(
        {
            "domain": rng.choice(["lode", "halo"], size=n),
            "class": rng.choice(["Measured", "Indicated", "Inferred"], size=n),
            "tonnes": rng.uniform(100, 1375, size=n),
            "au": np.where(rng.uniform(size=n) < 0.05, np.nan, rng.lognormal(0, 1, size=n)),
        }
    )


def test_metal_units_of_each_grade_unit():
    """Metal per tonne at grade 1 in each unit, from the definitions: 1 ppm = 1 g/t,
    1 % = 10,000 g/t, 1 troy oz = 31.1034768 g and 1 lb = 453.59237 g (international
    definitions of 1958 and 1959)."""
    assert metal_units("g/t") == [("troy oz", 1 / 31.1034768), ("kg", 1e-3)]
    assert metal_units("%") == [("t", 1e-2)]
    assert metal_units("ppb") == [("g", 1e-3)]
    # a base metal assayed in ppm: tonnes of metal, not troy ounces
    assert metal_units("ppm", "t") == [("t", 1e-6)]
    assert metal_units("%", "lb") == [("lb", 1e4 / 453.59237)]
    with pytest.raises(ValueError, match="unknown grade unit"):
        metal_units("oz/t")


def test_a_metal_unit_given_for_a_grade_carries_to_the_statement(rng):
    """report.metal_units: the grade-tonnage rows and the statement's metal column are in
    the unit given (zinc in ppm reported in tonnes)."""
    blocks = pd.DataFrame(
        {
            "domain": "seam",
            "class": "Indicated",
            "tonnes": rng.uniform(1000, 2000, size=50),
            "zn": rng.lognormal(np.log(9000), 0.5, size=50),
        }
    )
    gt = grade_tonnage(blocks, "zn", "ppm", [0.0, 5000.0], metal_unit="t")
    assert set(gt["metal_unit"]) == {"t"}
    table = statement(gt, "ppm", {"seam": 5000.0}, metal_unit="t")
    total = table[(table["domain"] == "seam") & (table["class"] == "Total")].iloc[0]
    above = blocks[blocks["zn"] >= 5000.0]
    assert total["metal (t)"] == pytest.approx((above["tonnes"] * above["zn"]).sum() / 1e6)
    assert [c for c in table if c.startswith("metal")] == ["metal (t)"]


def test_grade_tonnage_identities(blocks):
    cut = [0.0, 0.5, 1.0, 2.0, 5.0]
    gt = grade_tonnage(blocks, "au", "g/t", cut)
    oz = gt[gt["metal_unit"] == "troy oz"]
    kg = gt[gt["metal_unit"] == "kg"]
    # tonnage never rises with cut-off
    for _, part in oz.groupby(["domain", "class"]):
        assert np.all(np.diff(part["tonnes"].to_numpy()) <= 1e-9)
    # metal = tonnes x grade, unit-converted (1 troy oz = 31.1034768 g)
    ok = oz["tonnes"] > 0
    np.testing.assert_allclose(
        oz["metal"][ok], (oz["tonnes"] * oz["grade"] / TROY_OUNCE_GRAMS)[ok], rtol=1e-12
    )
    np.testing.assert_allclose(
        kg["metal"][ok.to_numpy()], (kg["tonnes"] * kg["grade"] / 1000)[ok.to_numpy()], rtol=1e-12
    )
    # at cut-off 0 the tonnage is the sum of estimated block tonnes
    total = oz[(oz["domain"] == "all") & (oz["class"] == "all") & (oz["cutoff"] == 0)][
        "tonnes"
    ].iloc[0]
    assert total == pytest.approx(blocks["tonnes"][blocks["au"].notna()].sum())
    # class rows add up to the totals, and domains too
    for c in cut:
        at = oz[oz["cutoff"] == c]
        by_class = at[(at["domain"] == "all") & (at["class"] != "all")]
        by_domain = at[(at["class"] == "all") & (at["domain"] != "all")]
        tot = at[(at["domain"] == "all") & (at["class"] == "all")]
        assert by_class["tonnes"].sum() == pytest.approx(tot["tonnes"].iloc[0])
        assert by_domain["metal"].sum() == pytest.approx(tot["metal"].iloc[0])


def test_percent_grades_report_tonnes_of_metal():
    b = pd.DataFrame({"domain": ["a"], "class": ["x"], "tonnes": [1000.0], "cu": [1.5]})
    gt = grade_tonnage(b, "cu", "%", [0.0])
    assert gt["metal_unit"].iloc[0] == "t" and gt["metal"].iloc[0] == pytest.approx(15.0)


def test_classification_rules_in_order():
    t = pd.DataFrame(
        {
            "domain": ["d"] * 5,
            "i": [0, 5, 10, 15, 20],
            "j": 0,
            "k": 0,
            "au": [1.0, 1.0, 1.0, 1.0, np.nan],
            "au_pass": [1, 1, 2, 3, 0],
            "au_holes": [4, 2, 2, 1, 0],
            "au_samples": [20, 10, 8, 3, 0],
            "au_distance": [20.0, 30, 40, 90, 0],
            "au_slope": [0.9, 0.85, 0.6, 0.2, np.nan],
        }
    )
    rules = [
        ClassRule("Measured", max_pass=1, min_holes=3, min_slope=0.8),
        ClassRule("Indicated", max_pass=2, min_holes=2, min_slope=0.5),
    ]
    labels = classify_blocks(t, "au", rules, "Inferred", clean_up=False)
    assert list(labels) == ["Measured", "Indicated", "Indicated", "Inferred", "Unestimated"]


def test_clean_up_removes_isolated_block():
    ii, jj, kk = np.meshgrid(range(3), range(3), range(3), indexing="ij")
    n = ii.size
    t = pd.DataFrame(
        {
            "domain": "d",
            "i": ii.ravel(),
            "j": jj.ravel(),
            "k": kk.ravel(),
            "au": 1.0,
            "au_pass": 2,
            "au_holes": 2,
            "au_samples": 8,
            "au_distance": 30.0,
            "au_slope": 0.6,
        }
    )
    centre = (t["i"] == 1) & (t["j"] == 1) & (t["k"] == 1)
    t.loc[centre, ["au_pass", "au_holes", "au_slope"]] = [1, 5, 0.95]
    rules = [
        ClassRule("Measured", max_pass=1, min_holes=3, min_slope=0.8),
        ClassRule("Indicated", max_pass=2, min_holes=2, min_slope=0.5),
    ]
    raw = classify_blocks(t, "au", rules, clean_up=False)
    cleaned = classify_blocks(t, "au", rules, clean_up=True)
    assert (
        raw[centre.to_numpy()][0] == "Measured"
        and set(cleaned) == {"Indicated"}
        and len(cleaned) == n
    )


def test_hermite_orthonormal():
    y, w = np.polynomial.hermite_e.hermegauss(80)
    h = hermite(y, 10)
    gram = (h * w / np.sqrt(2 * np.pi)) @ h.T
    np.testing.assert_allclose(gram, np.eye(11), atol=1e-10)


@pytest.mark.parametrize(("m", "s", "r"), [(2.0, 0.8, 0.7), (0.3, 1.2, 0.5), (5.0, 0.4, 0.9)])
def test_lognormal_closed_forms(m, s, r):
    # Matheron; Rivoirard (1994): phi_n = m (-s)^n / sqrt(n!), Var Z_v = m^2 (exp(s^2 r^2) - 1)
    ana = fit_anamorphosis(lambda y: m * np.exp(s * y - s * s / 2), 40)
    expected = np.array([m * (-s) ** n / sqrt(factorial(n)) for n in range(41)])
    np.testing.assert_allclose(ana.coefficients, expected, atol=1e-6 * m)
    assert ana.block_variance(r) == pytest.approx(m * m * (np.exp(s * s * r * r) - 1), rel=1e-6)
    assert support_coefficient(ana, m * m * (np.exp(s * s * r * r) - 1)) == pytest.approx(
        r, rel=1e-6
    )


def test_block_tonnage_of_lognormal_blocks():
    # In the discrete Gaussian model with a lognormal point law, blocks are lognormal with
    # log-sd s r: P(Z_v >= c) = 1 - Phi((ln(c/m) + (s r)^2/2) / (s r)) (Rivoirard 1994).
    from scipy.stats import norm

    m, s, r = 2.0, 0.9, 0.6
    ana = fit_anamorphosis(lambda y: m * np.exp(s * y - s * s / 2), 60)
    cut = np.array([0.5, 1.0, 2.0, 4.0])
    got = block_grade_tonnage(ana, r, cut)
    sr = s * r
    expected = 1 - norm.cdf((np.log(cut / m) + sr * sr / 2) / sr)
    np.testing.assert_allclose(got[:, 0], expected, atol=2e-3)


def test_html_page_from_its_template_escapes_text(tmp_path):
    """The page comes from the package's template: user text (a domain called '<b>') is
    escaped, tables are embedded as tables, cautions open and close the page."""
    from blockmodel.report.html import CAUTIONS, HtmlReport

    r = HtmlReport("Project <b>")
    r.warn("domain '<b>' & more")
    r.heading("Grade <b>")
    r.table(pd.DataFrame({"domain": ["<b>"], "tonnes": [1234.5]}))
    r.box("truth")
    r.paragraph("inside")
    r.end_box()
    path = tmp_path / "r.html"
    r.write(path)
    page = path.read_text(encoding="utf-8")
    assert "<b>" not in page.replace("<body>", "")
    assert "Project &lt;b&gt;" in page and "1,234.500" in page and "<table" in page
    assert '<div class="truth">' in page and "1 warning(s)" in page
    assert page.count("Caution.") == 2 and CAUTIONS.split(".")[0] in page


def test_html_tables_show_numbers_as_a_reader_expects():
    """Decimals where they carry something: metal rounded to 3 significant figures shows
    no '.000', counts get thousands separators, a missing value a dash; columns of words
    align left, columns of numbers right."""
    from blockmodel.report.html import HtmlReport

    r = HtmlReport("numbers")
    frame = pd.DataFrame(
        {"metal": [711000.0, 1234.567, 12.5, np.nan], "blocks": [6948, 1, 20, 300]}
    )
    r.table(frame)
    r.table(pd.DataFrame({"setting": ["source", "nodes"], "ore.cu": ["fitted", "1,024"]}))
    r.table(pd.DataFrame({"tonnes (t)": ["2,150,000", ""], "difference": ["+8.8%", "–"]}))
    html = r.parts[0].html
    for shown in (">711,000<", ">1,234.567<", ">12.500<", ">–<", ">6,948<", ">300<"):
        assert shown in html, shown
    assert "711,000.000" not in html and 'class="words"' not in html
    words = r.parts[1].html
    assert words.count('<td class="words">') == 4 and 'class="number"' not in words
    assert 'class="words"' not in r.parts[2].html  # numbers written out stay right

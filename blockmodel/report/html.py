"""One self-contained HTML report: tables and figures embedded, cautions at top and bottom."""

from __future__ import annotations

import base64
import dataclasses
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

__all__ = ["CAUTIONS", "HtmlReport", "Part"]

CAUTIONS = (
    "This output is a technical estimate produced by software from the data and settings "
    "listed in this report. It is not a public statement of Mineral Resources. A resource "
    "statement must be prepared and signed off by a Competent or Qualified Person under the "
    "reporting code in force (for example the JORC Code, the CIM Definition Standards with "
    "NI 43-101, SAMREC, or S-K 1300). Classification labels are proposals from numeric rules, "
    "not a classification. Density, cut-off grade and reasonable prospects for eventual "
    "economic extraction are the user's to justify."
)

_STYLE = """
body{font-family:system-ui,sans-serif;max-width:1100px;margin:2em auto;color:#222;line-height:1.4}
h1{font-size:1.6em} h2{border-bottom:1px solid #ccc;padding-bottom:.2em;margin-top:2em}
table{border-collapse:collapse;font-size:.85em;margin:.5em 0} td,th{border:1px solid #ccc;padding:2px 6px;text-align:right}
th{background:#f0f0f0} .caution{background:#fff4e5;border:1px solid #e0a050;padding:.8em;margin:1em 0}
.truth{background:#eef6ff;border:1px solid #7aa7d6;padding:.8em} img{max-width:100%}
td{vertical-align:top} .words{text-align:left}
"""


@dataclass(frozen=True)
class Part:
    """One piece of the page: a heading, paragraph, table, image, or the opening or
    closing of a boxed division (``text`` is its class)."""

    kind: str
    text: str = ""
    html: str = ""  # a table, rendered by pandas (the tool's own markup)
    data: str = ""  # an image, base64


class HtmlReport:
    """Collects the parts of a report, then writes one self-contained HTML page through
    the template ``templates/report.html`` (text escaped; every image embedded)."""

    def __init__(self, title: str):
        self.title = title
        self.parts: list[Part] = []
        self.warnings: list[str] = []

    def warn(self, text: str) -> None:
        """A warning shown in a box at the top of the report."""
        self.warnings.append(text)

    def heading(self, text: str) -> None:
        """A section heading."""
        self.parts.append(Part("heading", text))

    def paragraph(self, text: str) -> None:
        """A paragraph of text (escaped)."""
        self.parts.append(Part("paragraph", text))

    def table(self, frame: pd.DataFrame, *, digits: int = 3) -> None:
        """A table: numbers aligned right, with thousands separators and ``digits``
        decimals (none for whole numbers, nor for real numbers of 1,000 or more that are
        whole, e.g. metal rounded to 3 significant figures); a column holding words aligned
        left (numbers given as text, e.g. rounded for a statement, stay right); a missing
        value shown as a dash (all text escaped)."""
        import markupsafe

        def shown(v) -> str:
            if isinstance(v, str):
                return v
            if v is None or (np.isscalar(v) and pd.isna(v)):
                return "–"
            if isinstance(v, (bool, np.bool_)):
                return str(v)
            if isinstance(v, (int, np.integer)):
                return f"{v:,}"
            if isinstance(v, (float, np.floating)):
                whole = abs(v) >= 1000 and v == round(v)
                return f"{v:,.0f}" if whole else f"{v:,.{digits}f}"
            return str(v)

        words = [any(_is_words(v) for v in frame[c]) for c in frame.columns]
        kind = ['class="words"' if w else 'class="number"' for w in words]
        head = "".join(
            f"<th {k}>{markupsafe.escape(str(c))}</th>"
            for c, k in zip(frame.columns, kind, strict=True)
        )
        rows = "".join(
            "<tr>"
            + "".join(
                f"<td {k}>{markupsafe.escape(shown(v))}</td>"
                for v, k in zip(row, kind, strict=True)
            )
            + "</tr>"
            for row in frame.itertuples(index=False, name=None)
        )
        rendered = f"<table><thead><tr>{head}</tr></thead><tbody>{rows}</tbody></table>"
        self.parts.append(Part("table", html=rendered))

    def image(self, path: Path, caption: str = "") -> None:
        """A PNG embedded in the page, with a caption."""
        data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
        self.parts.append(Part("image", caption, data=data))

    def box(self, kind: str) -> None:
        """Open a boxed division of class ``kind`` (e.g. ``truth``)."""
        self.parts.append(Part("open", kind))

    def end_box(self) -> None:
        """Close the last division opened with :meth:`box`."""
        self.parts.append(Part("close"))

    def render(self) -> str:
        """The page as text (cautions at top and bottom, warnings first)."""
        import jinja2
        import markupsafe

        env = jinja2.Environment(
            loader=jinja2.PackageLoader("blockmodel.report", "templates"),
            autoescape=True,
            undefined=jinja2.StrictUndefined,
        )
        parts = [
            dataclasses.replace(p, html=markupsafe.Markup(p.html)) if p.kind == "table" else p
            for p in self.parts
        ]
        return env.get_template("report.html").render(
            title=self.title,
            style=markupsafe.Markup(_STYLE),
            cautions=CAUTIONS,
            warnings=self.warnings,
            parts=parts,
        )

    def write(self, path: Path) -> None:
        """Write the page to ``path``."""
        Path(path).write_text(self.render(), encoding="utf-8")


def _is_words(value) -> bool:
    """Whether a table cell holds words: text that is not a number written out (with
    thousands separators, a sign or a per cent), a blank or a dash."""
    if not isinstance(value, str):
        return False
    text = value.strip().replace(",", "").removesuffix("%")
    if text in ("", "–", "-"):
        return False
    try:
        float(text)
    except ValueError:
        return True
    return False

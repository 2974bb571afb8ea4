"""One self-contained HTML report: tables and figures embedded, cautions at top and bottom."""

from __future__ import annotations

import base64
import html
from pathlib import Path

import pandas as pd

__all__ = ["CAUTIONS", "HtmlReport"]

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
"""


class HtmlReport:
    """Collects sections, then writes one HTML file with every image embedded."""

    def __init__(self, title: str):
        self.title = title
        self.parts: list[str] = []
        self.warnings: list[str] = []

    def warn(self, text: str) -> None:
        """A warning shown in a box at the top of the report."""
        self.warnings.append(text)

    def heading(self, text: str) -> None:
        """A section heading."""
        self.parts.append(f"<h2>{html.escape(text)}</h2>")

    def paragraph(self, text: str) -> None:
        """A paragraph of text (escaped)."""
        self.parts.append(f"<p>{html.escape(text)}</p>")

    def table(self, frame: pd.DataFrame, *, digits: int = 3) -> None:
        """A table, numbers with ``digits`` decimals and thousands separators."""
        self.parts.append(
            frame.to_html(
                index=False, float_format=lambda v: f"{v:,.{digits}f}", na_rep="–", border=0
            )
        )

    def image(self, path: Path, caption: str = "") -> None:
        """A PNG embedded in the page, with a caption."""
        data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
        cap = f"<figcaption>{html.escape(caption)}</figcaption>" if caption else ""
        self.parts.append(
            f'<figure><img alt="{html.escape(caption)}" src="data:image/png;base64,{data}">{cap}</figure>'
        )

    def raw(self, fragment: str) -> None:
        """HTML written as given (the tool's own markup only)."""
        self.parts.append(fragment)

    def write(self, path: Path) -> None:
        """Write the page (cautions at top and bottom, warnings first) to ``path``."""
        caution = f'<div class="caution"><strong>Caution.</strong> {html.escape(CAUTIONS)}</div>'
        warned = ""
        if self.warnings:
            items = "".join(f"<li>{html.escape(w)}</li>" for w in self.warnings)
            warned = (
                f'<div class="caution"><strong>{len(self.warnings)} warning(s) from this run'
                f"</strong><ul>{items}</ul></div>"
            )
        doc = (
            f"<!doctype html><html><head><meta charset='utf-8'><title>{html.escape(self.title)}</title>"
            f"<style>{_STYLE}</style></head><body><h1>{html.escape(self.title)}</h1>{caution}"
            + warned
            + "\n".join(self.parts)
            + f"{caution}</body></html>"
        )
        Path(path).write_text(doc, encoding="utf-8")

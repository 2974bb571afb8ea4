"""What every figure shares: matplotlib loaded lazily with the Agg back end, the colour
maps (grades use the perceptually uniform 'cividis'; classes the palette below) and PNG
files marked as the tool's."""

from __future__ import annotations

from pathlib import Path

__all__ = ["CLASS_COLOURS", "GRADE_CMAP", "PNG_SOFTWARE", "pyplot", "save_png"]

GRADE_CMAP = "cividis"
CLASS_COLOURS = {
    "Measured": "#1b7837",
    "Indicated": "#5aae61",
    "Inferred": "#f4a582",
    "Unestimated": "#bababa",
}


def pyplot():
    """matplotlib.pyplot with the Agg back end (no display), imported on first use."""
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


PNG_SOFTWARE = "blockmodel"  # PNG text chunk "Software": marks the images the tool wrote


def save_png(fig, path: Path) -> None:
    """Write ``fig`` as a PNG marked as the tool's (text chunk Software) and close it."""
    fig.savefig(path, dpi=110, bbox_inches="tight", metadata={"Software": PNG_SOFTWARE})
    pyplot().close(fig)

"""What every figure shares: matplotlib loaded lazily with the Agg back end, the colour
maps (grades use the perceptually uniform 'cividis'; classes the palette below) and PNG
files marked as the tool's."""

from __future__ import annotations

from pathlib import Path

__all__ = ["CLASS_COLOURS", "GRADE_CMAP", "PNG_SOFTWARE", "pyplot", "save_png", "tidy_axes"]

GRADE_CMAP = "cividis"
# classes in colours no reader confuses, colour-blind readers included (the palette of
# Okabe & Ito 2008, Color Universal Design)
CLASS_COLOURS = {
    "Measured": "#0072B2",
    "Indicated": "#E69F00",
    "Inferred": "#CC79A7",
    "Unestimated": "#BBBBBB",
}


def pyplot():
    """matplotlib.pyplot with the Agg back end (no display), imported on first use."""
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


PNG_SOFTWARE = "blockmodel"  # PNG text chunk "Software": marks the images the tool wrote


def tidy_axes(fig) -> None:
    """Numbers in full (no ``+7.034e6`` offset or exponent) and at most seven ticks on an
    axis whose ticks matplotlib chose, so labels never run together."""
    from matplotlib.ticker import AutoLocator, MaxNLocator, ScalarFormatter

    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            formatter = axis.get_major_formatter()
            if isinstance(formatter, ScalarFormatter):
                formatter.set_useOffset(False)
                formatter.set_scientific(False)
            if type(axis.get_major_locator()) is AutoLocator:
                axis.set_major_locator(MaxNLocator(nbins=7))


def save_png(fig, path: Path) -> None:
    """Write ``fig`` as a PNG marked as the tool's (text chunk Software) and close it,
    its axes tidied (:func:`tidy_axes`)."""
    tidy_axes(fig)
    fig.savefig(path, dpi=110, bbox_inches="tight", metadata={"Software": PNG_SOFTWARE})
    pyplot().close(fig)

"""Shared figure settings: sizes for A4, resolution, PNG output, input checks.

Figures are made with :class:`matplotlib.figure.Figure` and the Agg canvas
directly (no ``pyplot`` state), so helpers can run in worker threads and
never open a window.
"""

from __future__ import annotations

import io
from typing import Any

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from speciakin.errors import InputError, Location

__all__ = [
    "legend_below",
    "LEGEND_WRAP",
    "TEXT_WIDTH_IN",
    "DEFAULT_HEIGHT_IN",
    "DPI",
    "RC",
    "new_figure",
    "to_png",
    "as_array",
    "same_length",
]

#: Text width of an A4 page with 25 mm margins: 160 mm [in].
TEXT_WIDTH_IN = 160.0 / 25.4
#: Default figure height [in].
DEFAULT_HEIGHT_IN = 3.4
#: Resolution of the PNG output [dots per inch].
DPI = 170

#: Font sizes that stay readable when the figure is printed at text width.
RC: dict[str, Any] = {
    "font.size": 9,
    "axes.titlesize": 10,
    "axes.labelsize": 9,
    "legend.fontsize": 8,
    "xtick.labelsize": 8,
    "ytick.labelsize": 8,
    "axes.grid": True,
    "grid.alpha": 0.3,
    "axes.spines.top": False,
    "axes.spines.right": False,
}


def new_figure(width_in: float = TEXT_WIDTH_IN, height_in: float = DEFAULT_HEIGHT_IN) -> Figure:
    """A matplotlib figure of the given size [in], attached to an Agg canvas."""
    import matplotlib

    with matplotlib.rc_context(RC):
        fig = Figure(figsize=(width_in, height_in), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


#: zlib level of the PNG output: level 3 writes smaller files than level 6 (the default) once the
#: unused alpha channel is left out, in about two thirds of the time.
PNG_COMPRESS_LEVEL = 3


def to_png(fig: Figure, dpi: int = DPI) -> bytes:
    """Render ``fig`` to PNG bytes at ``dpi`` [dots per inch] (RGB, 8 bit per channel).

    The figure is drawn once on its Agg canvas (which runs its constrained
    layout at ``dpi``) and the pixels are written by Pillow.  ``savefig``
    would draw it twice (a dry draw for the layout, then the drawing) and
    keep an alpha channel that is opaque everywhere (the figure has an opaque
    background); the pixels are the same (``tests/report/test_figures.py``).
    ``fig`` keeps ``dpi`` afterwards.
    """
    from PIL import Image
    from PIL.PngImagePlugin import PngInfo

    fig.set_dpi(dpi)
    fig.canvas.draw()
    rgba = fig.canvas.buffer_rgba()
    image = Image.frombuffer("RGBA", (rgba.shape[1], rgba.shape[0]), rgba, "raw", "RGBA", 0, 1).convert("RGB")
    info = PngInfo()
    info.add_text("Software", "speciakin")
    buffer = io.BytesIO()
    image.save(buffer, format="png", pnginfo=info, dpi=(dpi, dpi), compress_level=PNG_COMPRESS_LEVEL)
    return buffer.getvalue()


def finish_with_legend(fig: Figure, ax: Any, x_label: str, y_label: str, title: str = "",
                       band_label: str | None = None, handles: list | None = None) -> bytes:
    """Label the axes, add the title, a legend entry for a grey band (when
    ``band_label``) and the legend below the axes in two columns (long
    compound names keep the full plot width); PNG bytes of ``fig``.
    ``handles``: the legend entries (default: the labelled artists of ``ax``)."""
    from speciakin.palette import NEUTRAL

    if handles is None:
        if band_label:
            ax.fill_between([], [], [], color=NEUTRAL, alpha=0.18, linewidth=0, label=band_label)
        handles = ax.get_legend_handles_labels()[0]
    elif band_label:
        from matplotlib.patches import Patch

        handles = [*handles, Patch(color=NEUTRAL, alpha=0.18, linewidth=0, label=band_label)]
    ax.set_xlabel(x_label)
    ax.set_ylabel(y_label)
    if title:
        ax.set_title(title)
    if handles:
        legend_below(fig, handles)
    return to_png(fig)


#: Characters of a legend label per line in a two-column legend below a text-width figure.
LEGEND_WRAP = 44


def legend_below(fig: Figure, handles: list | None = None) -> None:
    """The figure's legend below the axes, two columns, labels wrapped to :data:`LEGEND_WRAP`
    characters (compound names can be long), at the legend font size of :data:`RC`."""
    import textwrap

    if handles is None:
        handles = [h for ax in fig.axes for h in ax.get_legend_handles_labels()[0]]
    for h in handles:
        h.set_label("\n".join(textwrap.wrap(h.get_label(), LEGEND_WRAP)) or h.get_label())
    fig.legend(handles=handles, loc="outside lower center", ncol=2, frameon=False, fontsize=RC["legend.fontsize"])


def as_array(values: Any, name: str, ndim: int = 1, allow_nan: bool = True) -> np.ndarray:
    """``values`` as a float array of ``ndim`` dimensions, or an InputError naming ``name``."""
    try:
        array = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise InputError("values are not numbers", Location(key=name), type(values).__name__,
                         "an array of numbers") from None
    if array.ndim != ndim:
        raise InputError("wrong array shape", Location(key=name), array.shape, f"{ndim}-dimensional array")
    if not allow_nan and not np.all(np.isfinite(array)):
        raise InputError("values contain NaN or infinity", Location(key=name),
                         int(np.count_nonzero(~np.isfinite(array))), "finite numbers only")
    if np.any(np.isinf(array)):
        raise InputError("values contain infinity", Location(key=name), None, "finite numbers or NaN")
    return array


def same_length(**arrays: np.ndarray) -> None:
    """Raise an InputError unless every array has the same length."""
    lengths = {k: len(v) for k, v in arrays.items()}
    if len(set(lengths.values())) > 1:
        raise InputError("arrays differ in length", Location(key=", ".join(lengths)), lengths,
                         "the same number of points")

"""The one colour code of rootsim: every figure, render and mesh colours categories from here.

The colours are the colour-blind-safe palette of Okabe and Ito (2008), "Color Universal Design
(CUD): how to make figures and presentations that are friendly to colorblind people",
https://jfly.uni-koeln.de/color/ (also recommended by Wong 2011, Nature Methods 8:441,
doi:10.1038/nmeth.1618). Root order ``k`` is always ``CATEGORY_COLOURS_RGB[k]`` (order 0 orange,
order 1 blue, order 2 bluish green, ...), and the ``i``-th category of any other categorical
colouring (root class, plant, variant) is ``CATEGORY_COLOURS_RGB[i]``; beyond seven categories the
colours repeat. Totals ("all roots") are drawn in :data:`TOTAL_COLOUR_RGB` (black).
"""

from __future__ import annotations

import numpy as np

__all__ = ["CATEGORY_COLOURS_RGB", "TOTAL_COLOUR_RGB", "FIELD_COLOURMAP", "category_colours", "order_colours", "hex_colour"]

#: Okabe-Ito colours without black, RGB 0..255, shape (7, 3): orange, blue, bluish green,
#: reddish purple, vermillion, sky blue, yellow.
CATEGORY_COLOURS_RGB = np.array([[230, 159, 0], [0, 114, 178], [0, 158, 115], [204, 121, 167],
                                 [213, 94, 0], [86, 180, 233], [240, 228, 66]], dtype=np.uint8)
CATEGORY_COLOURS_RGB.setflags(write=False)
#: Colour of totals (all roots, the stand mean), RGB 0..255: Okabe-Ito black.
TOTAL_COLOUR_RGB = np.array([0, 0, 0], dtype=np.uint8)
#: Sequential colour map (matplotlib name) of soil fields in renders: cividis, readable with colour-vision
#: deficiency, low values dark blue, high values yellow (Nuñez, Anderton & Renslow 2018, PLoS ONE 13:e0199239,
#: doi:10.1371/journal.pone.0199239).
FIELD_COLOURMAP = "cividis"


def order_colours(order) -> np.ndarray:
    """RGB colour of each root order, uint8, shape (n, 3) (repeating past seven orders).

    Parameters
    ----------
    order : array_like of int, shape (n,)
    """
    return CATEGORY_COLOURS_RGB[np.asarray(order, dtype=np.int64) % len(CATEGORY_COLOURS_RGB)]


def category_colours(count: int) -> np.ndarray:
    """Colours of ``count`` categories in order, floats in [0, 1], shape (count, 3)."""
    index = np.arange(max(int(count), 0)) % len(CATEGORY_COLOURS_RGB)
    return CATEGORY_COLOURS_RGB[index].astype(np.float64) / 255.0


def hex_colour(rgb) -> str:
    """``"#rrggbb"`` of an RGB triple: integers 0..255, or floats 0..1."""
    raw = np.asarray(rgb)
    values = raw.astype(np.float64) * (255.0 if raw.dtype.kind == "f" else 1.0)
    r, g, b = (int(round(v)) for v in values[:3])
    return f"#{r:02x}{g:02x}{b:02x}"

"""A chart's size does not depend on its title, even saved with a tight bounding box (as st.pyplot does)."""

import io

import pytest
from PIL import Image

from fieldtl.bands import BandSpectrum, nominal_bands_hz
from fieldtl.rating.iso717 import rate_iso717_1
from fieldtl.report.plot import TITLE_WIDTH_FRACTION, fitted_title, rating_figure

BANDS_HZ = tuple(nominal_bands_hz(100, 3150))
# An invented DnT spectrum rising 2 dB per band from 35 dB.
SPECTRUM = BandSpectrum(BANDS_HZ, tuple(35.0 + 2.0 * i for i in range(len(BANDS_HZ))), "dB", "DnT")


def png_size(title, **options):
    buffer = io.BytesIO()
    rating_figure(SPECTRUM, rate_iso717_1(SPECTRUM), title=title).savefig(buffer, format="png", **options)
    return Image.open(io.BytesIO(buffer.getvalue())).size


@pytest.mark.parametrize("long_title", [
    "Bedroom 4 to bedroom 7, level 2 " * 313,          # 10 016 characters of ordinary words
    "W" * 10_000,                                        # the widest Latin letter, no space to wrap at
    "line\n" * 2_000,                                    # 10 000 characters, 2 000 line breaks
    "Ж" * 10_000,                                        # Cyrillic capitals
])
def test_png_size_is_the_same_for_a_10000_character_title(long_title):
    for options in ({}, {"bbox_inches": "tight"}):
        assert png_size(long_title, **options) == png_size("Bedroom 4 to 7", **options)


def test_a_title_that_fits_is_kept_and_a_long_one_is_cut_to_the_width():
    from matplotlib.figure import Figure

    figure = Figure(figsize=(7.0, 4.2), dpi=110)
    assert fitted_title(figure, "Bedroom 4 to 7") == "Bedroom 4 to 7"
    assert fitted_title(figure, "  two\nlines  ") == "two lines"
    cut = fitted_title(figure, "W" * 10_000)
    assert cut.endswith("…") and 10 < len(cut) < 200
    # The cut line spans at most the allowed width, and one more character would not fit.
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    renderer = FigureCanvasAgg(figure).get_renderer()
    probe = figure.text(0, 0, cut, fontsize=10)
    limit = TITLE_WIDTH_FRACTION * figure.bbox.width
    assert probe.get_window_extent(renderer).width <= limit
    probe.set_text(cut[:-1] + "W…")
    assert probe.get_window_extent(renderer).width > limit

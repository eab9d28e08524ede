"""unit_text: units as the trade writes them (common practice in papers and observatory products)."""

import astropy.units as u
import pytest

from cubeloupe.analysis import unit_text


@pytest.mark.parametrize("unit, text", [
    (u.Jy / u.beam * u.km / u.s, "Jy/beam km/s"),
    ("Jy km / (beam s)", "Jy/beam km/s"),
    (u.mJy / u.beam, "mJy/beam"),
    (u.K * u.km / u.s, "K km/s"),
    (u.mK, "mK"),
    (u.Jy * u.km / u.s, "Jy km/s"),
    (u.Jy / u.pix, "Jy/pixel"),
    (u.K * u.km / u.s * u.pc**2, "K km/s pc2"),
    (u.km / u.s, "km/s"),
    (u.dimensionless_unscaled, ""),
])
def test_written_as_in_the_trade(unit, text):
    assert unit_text(unit) == text

"""Beer–Lambert crown extinction (Campbell & Norman 1998)."""

import numpy as np
import pytest

from walkcomfort.environment import crowns
from walkcomfort.errors import InputError


@pytest.mark.parametrize("lai, elev, expected", [
    # hand values of tau = exp(-0.5 * Omega * LAI / sin(beta)), Omega = 1
    (1.0, 90.0, np.exp(-0.5)), (3.0, 30.0, np.exp(-3.0)), (4.0, 45.0, np.exp(-2.0 / np.sin(np.pi / 4))),
])
def test_beam_transmissivity_formula(lai, elev, expected):
    assert float(crowns.beam_transmissivity(lai, elev, clumping=1.0)) == pytest.approx(expected, rel=1e-12)


def test_low_sun_passes_less_and_night_passes_nothing():
    t = crowns.beam_transmissivity(3.0, np.array([60.0, 30.0, 10.0, -1.0]))
    assert t[0] > t[1] > t[2] > t[3] == 0.0


def test_diffuse_transmissivity_between_beam_extremes():
    # Campbell & Norman's diffuse K_d for a spherical canopy (~0.8-0.9 at LAI 1-3; from memory)
    for lai in (1.0, 3.0):
        td = float(crowns.diffuse_transmissivity(lai, clumping=1.0))
        kd = -np.log(td) / lai
        assert 0.7 < kd < 1.0
    assert crowns.diffuse_transmissivity(0.0) == pytest.approx(1.0)


def test_defaults_and_leaf_off_months():
    assert crowns.crown_lai("broadleaf_open") == 3.0
    with pytest.raises(InputError, match="broadleaf_dense"):
        crowns.crown_lai("baobab")
    lai = crowns.seasonal_area_index(5.0, np.array([1, 7]), lat=40.0)
    assert lai[0] == crowns.WOODY_AREA_INDEX and lai[1] == 5.0
    south = crowns.seasonal_area_index(5.0, np.array([1, 7]), lat=-34.0)
    assert south[0] == 5.0 and south[1] == crowns.WOODY_AREA_INDEX

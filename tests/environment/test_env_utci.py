"""UTCI: against pythermalcomfort (test-only reference), fixed rows, wind height, flags, bands."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.environment import utci
from walkcomfort.errors import InputError, ValidityRangeWarning


def test_wind_height_factor_from_1_1_m():
    # From the log law with z0 = 0.01 m: ln(10/0.01)/ln(1.1/0.01) = 6.9078/4.7005 = 1.4696.
    assert utci.wind_at_10m(1.0, 1.1) == pytest.approx(1.4696, abs=1e-4)
    s = pd.Series([1.0, np.nan], index=pd.Index([5, 6]))
    out = utci.wind_at_10m(s, 1.1)
    assert out.index.equals(s.index) and np.isnan(out.iloc[1])
    with pytest.raises(InputError, match="roughness"):
        utci.wind_at_10m(1.0, 0.005)


@pytest.mark.parametrize("ta, tr, v, rh, expected", [
    # pythermalcomfort's own test suite (tests/test_utci.py): utci(25, 27, 1, 50) -> 25.2.
    (25.0, 27.0, 1.0, 50.0, 25.2),
    # pythermalcomfort's documented example: utci(tdb=25, tr=25, v=1.0, rh=50) -> 24.6.
    (25.0, 25.0, 1.0, 50.0, 24.6),
    # fixed row given in issue 3 (strong wind, radiant deficit) -> 20.0; the same value
    # comes out of pythermalcomfort.models.utci (20.013, checked in the random test's library).
    (27.0, 22.0, 10.0, 50.0, 20.0),
])
def test_fixed_rows(ta, tr, v, rh, expected):
    out = utci.utci_from_conditions(ta, tr, v, rh)
    assert out[C.UTCI_C].iloc[0] == pytest.approx(expected, abs=0.05)


@pytest.mark.slow  # pythermalcomfort compiles with numba on first use (~25 s on a cold cache)
def test_against_pythermalcomfort_random_in_range():
    # Reference: pythermalcomfort.models.utci (a general reference library, test-only).
    # Both use the Bröde et al. (2012) polynomial and Hardy's (1998) saturation vapour
    # pressure, so they agree to rounding; the issue allows 0.3 °C.
    from pythermalcomfort.models import utci as ref_utci

    rng = np.random.default_rng(20261201)
    n = 2000
    ta = rng.uniform(-45, 45, n)
    tr = ta + rng.uniform(-25, 65, n)
    v = rng.uniform(0.5, 17, n)
    rh = rng.uniform(5, 100, n)
    e = utci.vapour_pressure_hpa(ta, rh)
    keep = e < 48  # inside the 50 hPa vapour limit with a margin
    ta, tr, v, rh = ta[keep], tr[keep], v[keep], rh[keep]
    assert keep.sum() >= 1000
    ours = utci.utci_from_conditions(ta, tr, v, rh)
    ref = ref_utci(tdb=ta, tr=tr, v=v, rh=rh, round_output=False, limit_inputs=False).utci
    assert not ours[C.QA_UTCI_RANGE].any()
    np.testing.assert_allclose(ours[C.UTCI_C].to_numpy(), ref, atol=0.3)
    assert np.max(np.abs(ours[C.UTCI_C].to_numpy() - ref)) < 0.01  # in practice identical


def test_flags_clamp_and_count_never_drop():
    idx = pd.date_range("2026-07-14 10:00", periods=5, freq="1s", tz="UTC")
    ta = pd.Series([25.0, 25.0, 55.0, 25.0, np.nan], index=idx)
    out = None
    with pytest.warns(ValidityRangeWarning, match="1 of 5 rows"):
        out = utci.utci_from_conditions(ta, [27.0, 27.0, 57.0, 27.0, 27.0], [0.2, 1.0, 1.0, 0.5, 1.0], 50.0)
    assert out.index.equals(idx) and len(out) == 5
    assert out[C.QA_WIND_CLAMPED].tolist() == [True, False, False, False, False]
    assert out[C.QA_UTCI_RANGE].tolist() == [False, False, True, False, False]
    assert out.attrs["qa_counts"] == {"rows": 5, "out_of_range": 1, "wind_clamped": 1}
    # clamped row equals the 0.5 m/s row (from the definition of the clamp)
    assert out[C.UTCI_C].iloc[0] == pytest.approx(out[C.UTCI_C].iloc[3])
    assert np.isfinite(out[C.UTCI_C].iloc[2])  # extrapolated but kept and flagged
    assert np.isnan(out[C.UTCI_C].iloc[4])


def test_bands_edges_follow_glossary():
    # Assessment scale of Bröde et al. (2012) as in walkcomfort.columns.UTCI_BANDS; upper bounds inclusive.
    values = [47, 46.0, 40, 35, 30, 20, 5, -5, -20, -30, -45, np.nan]
    names = [b[2] for b in C.UTCI_BANDS]
    expected = [names[0], names[1], names[1], names[2], names[3], names[4], names[5], names[6], names[7],
                names[8], names[9], None]
    got = utci.utci_band(np.array(values))
    assert list(got) == expected
    assert utci.utci_band(26.0) == "no thermal stress" and utci.utci_band(26.01) == "moderate heat stress"
    s = utci.utci_band(pd.Series([10.0], index=[7]))
    assert s.index.tolist() == [7] and s.iloc[0] == "no thermal stress"

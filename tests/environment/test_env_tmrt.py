"""Mean radiant temperature: ISO 7726 globe, its inverse, six-direction identity, SolarCal cross-check."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort.environment import tmrt

SIGMA = tmrt.SIGMA


def test_iso7726_forced_convection_standard_globe():
    # ISO 7726:1998 Annex B forced-convection formula, computed by hand from the
    # standard's equation: Ta 30, Tg 40 °C, v 1 m/s, D 0.15 m, eps 0.95 -> 58.46 °C.
    assert tmrt.tmrt_from_globe(40.0, 30.0, 1.0, diameter_m=0.15, emissivity=0.95) == pytest.approx(58.46, abs=0.01)


def test_iso7726_forced_convection_small_globe():
    # Same formula (ISO 7726 Annex B) with a 38 mm globe: D 0.038 m -> 70.25 °C.
    assert tmrt.tmrt_from_globe(40.0, 30.0, 1.0, diameter_m=0.038, emissivity=0.95) == pytest.approx(70.25, abs=0.01)


def test_iso7726_natural_convection_taken_when_larger():
    # ISO 7726 Annex B: in still air the natural-convection coefficient 1.4 (dT/D)^0.25
    # exceeds the forced one 6.3 v^0.6/D^0.4; the standard's natural form is
    # Tmrt = [(Tg+273)^4 + 0.25e8/eps (|Tg-Ta|/D)^0.25 (Tg-Ta)]^0.25 - 273 (from the standard's formula).
    tg, ta, d, eps = 40.0, 30.0, 0.15, 0.95
    natural = ((tg + 273) ** 4 + 0.25e8 / eps * (abs(tg - ta) / d) ** 0.25 * (tg - ta)) ** 0.25 - 273
    assert tmrt.tmrt_from_globe(tg, ta, 0.0, d, eps) == pytest.approx(natural, abs=1e-9)
    assert tmrt.tmrt_from_globe(tg, ta, 0.01, d, eps) == pytest.approx(natural, abs=1e-9)
    # at 1 m/s forced wins, so the result exceeds the natural-only value
    assert tmrt.tmrt_from_globe(tg, ta, 1.0, d, eps) > natural


def test_globe_inverse_roundtrip_keeps_type_and_nan():
    # From the definition: globe_from_tmrt is the inverse of tmrt_from_globe.
    rng = np.random.default_rng(7)
    n = 500
    ta = rng.uniform(-10, 45, n)
    tr = ta + rng.uniform(-15, 45, n)
    v = rng.uniform(0, 6, n)
    d = rng.choice([0.038, 0.04, 0.15], n)
    tg = tmrt.globe_from_tmrt(tr, ta, v, d, 0.95)
    back = tmrt.tmrt_from_globe(tg, ta, v, d, 0.95)
    np.testing.assert_allclose(back, tr, atol=1e-4)
    # globe lies between air and radiant temperature (from the heat balance)
    assert np.all((tg - np.minimum(ta, tr) > -1e-6) & (np.maximum(ta, tr) - tg > -1e-6))
    idx = pd.date_range("2026-07-14", periods=3, freq="1s", tz="UTC")
    s = tmrt.tmrt_from_globe(pd.Series([35.0, np.nan, 30.0], index=idx), 30.0, 1.0, 0.038)
    assert isinstance(s, pd.Series) and s.index.equals(idx) and np.isnan(s.iloc[1])
    assert s.iloc[2] == pytest.approx(30.0)  # globe at air temperature -> Tmrt = Ta


def test_six_direction_identity():
    # From the definition of the six-direction method (VDI 3787-2; Thorsson et al. 2007):
    # six long-wave fluxes sigma*303.15^4 and no short wave -> Tmrt exactly 30.00 °C,
    # because the weighting factors sum to 1 (4 x 0.22 + 2 x 0.06).
    lw = SIGMA * 303.15 ** 4
    assert tmrt.tmrt_from_fluxes(0.0, 0.0, 0.0, lw, lw, lw) == pytest.approx(30.00, abs=1e-9)
    assert pytest.approx(1.0) == 4 * tmrt.F_LATERAL + 2 * tmrt.F_VERTICAL


def _solarcal_fp_average(alt):
    """Azimuth-averaged standing fp of ASHRAE 55 Appendix C, read back from pythermalcomfort."""
    from pythermalcomfort.models import solar_gain

    sharps = np.arange(0, 181, 15.0)
    sc = solar_gain(sol_altitude=np.full(sharps.size, float(alt)), sharp=sharps, sol_radiation_dir=1000.0,
                    sol_transmittance=1.0, f_svv=0.0, f_bes=1.0, asw=0.7, posture="standing",
                    round_output=False)
    # with f_svv = 0 only the direct term is left: dMRT = (asw/0.95) fp I / hr, hr = 6
    fp = np.asarray(sc.delta_mrt) * 6.0 * 0.95 / 0.7 / 1000.0
    return np.trapezoid(fp, sharps) / 180.0


@pytest.mark.slow  # pythermalcomfort compiles with numba on first use
@pytest.mark.parametrize("alt", [5, 15, 30, 45, 60, 75, 89])
def test_projected_area_factor_against_solarcal_table(alt):
    # ASHRAE 55-2023 Appendix C (SolarCal) standing fp table via pythermalcomfort,
    # averaged over the horizontal sun angle; our formula is azimuth-averaged. Tolerance
    # 0.012: the largest gap seen over 0…90° is 0.009 (at 89°), the table's own step is ~0.01.
    assert tmrt.projected_area_factor(alt) == pytest.approx(_solarcal_fp_average(alt), abs=0.012)


@pytest.mark.slow
@pytest.mark.parametrize("alt", [10, 30, 45, 60, 80])
def test_shortwave_part_against_solarcal(alt):
    # Independent cross-check of the short-wave part with ASHRAE 55 Appendix C (SolarCal,
    # pythermalcomfort.models.solar_gain), averaged over the horizontal sun angle. SolarCal
    # uses diffuse = 0.2 x direct, a floor reflectance, f_svv = 1 (open sky) and
    # dMRT = ERF / (hr f_eff) with a fixed hr = 6 W m-2 K-1 and long-wave absorptance 0.95.
    # Its short-wave terms have the same structure as ours (0.5 of diffuse and of
    # ground-reflected light reach the body), so we compare the *absorbed* short-wave
    # flux, recovered from SolarCal's dMRT as dMRT*hr*0.95. Tolerance: the fp difference
    # allowed above, 0.012 x 0.7 x I, plus 1 W m-2.
    from pythermalcomfort.models import solar_gain

    direct, ta, rho = 800.0, 25.0, 0.2
    sharps = np.arange(0, 181, 15.0)
    sc = solar_gain(sol_altitude=np.full(sharps.size, float(alt)), sharp=sharps, sol_radiation_dir=direct,
                    sol_transmittance=1.0, f_svv=1.0, f_bes=1.0, asw=0.7, posture="standing",
                    floor_reflectance=rho, round_output=False)
    dmrt_sc = np.trapezoid(np.asarray(sc.delta_mrt), sharps) / 180.0
    absorbed_sc = dmrt_sc * 6.0 * 0.95

    # ours: all long-wave at air temperature (black sky and ground at Ta), so every
    # watt above sigma Ta^4 is absorbed short wave
    e = np.array([float(alt)])
    fl = tmrt.outdoor_fluxes(e, np.array([direct]), np.array([0.2 * direct]), np.array([1.0]), np.array([1.0]),
                             np.array([ta]), np.array([50.0]), ground_albedo=rho, ground_emissivity=1.0,
                             ground_sun_excess_k=0.0, sky_emissivity_frac=1.0)
    t = tmrt.tmrt_from_fluxes(*(fl[c].to_numpy() for c in ("k_down", "k_up", "k_side", "l_down", "l_up", "l_side",
                                                          "beam_normal_wm2")), e)[0]
    absorbed_ours = tmrt.EMISSIVITY_BODY * SIGMA * ((t + 273.15) ** 4 - (ta + 273.15) ** 4)
    assert absorbed_ours == pytest.approx(absorbed_sc, abs=0.012 * 0.7 * direct + 1.0)
    # and in temperature: SolarCal's linear dMRT (hr = 6) overestimates large gains; put its
    # absorbed flux through the same Stefan-Boltzmann balance and it matches ours within
    # the same tolerance converted with 4 eps sigma T^3 at the warmer temperature.
    t_sc = (((ta + 273.15) ** 4 + absorbed_sc / (tmrt.EMISSIVITY_BODY * SIGMA)) ** 0.25) - 273.15
    slope = 4 * tmrt.EMISSIVITY_BODY * SIGMA * (ta + 273.15) ** 3
    assert t == pytest.approx(t_sc, abs=(0.012 * 0.7 * direct + 1.0) / slope)


def test_outdoor_tmrt_shade_and_night_behave():
    # From the definitions: shade lowers Tmrt by the direct term only; at night no short wave.
    e = np.array([60.0, 60.0, -5.0])
    out = tmrt.tmrt_outdoor(e, np.array([850.0, 850.0, 0.0]), np.array([120.0, 120.0, 0.0]),
                            np.array([1.0, 0.0, 1.0]), np.array([0.8, 0.8, 0.8]),
                            np.array([30.0, 30.0, 20.0]), np.array([40.0, 40.0, 60.0]))
    assert out[0] - out[1] > 15  # stepping into shade on a clear midday: a large drop
    assert out[2] < 20.0  # night: clear sky colder than air
    fl = tmrt.outdoor_fluxes(e, np.array([850.0, 850.0, 0.0]), np.array([120.0, 120.0, 0.0]),
                             np.array([1.0, 0.0, 1.0]), np.array([0.8, 0.8, 0.8]),
                             np.array([30.0, 30.0, 20.0]), np.array([40.0, 40.0, 60.0]))
    assert fl["t_ground_c"][0] > fl["t_ground_c"][1] == pytest.approx(30.0)
    assert fl["beam_normal_wm2"][2] == 0.0


def test_sky_emissivity_brutsaert_value():
    # Brutsaert (1975): eps = 1.24 (e/T)^(1/7); at 20 °C, 50 % (e = 11.69 hPa, Hardy) -> 0.783.
    e = 0.5 * 23.39  # hPa, saturation at 20 °C is 23.39 hPa (WMO table, from memory)
    assert tmrt.sky_emissivity(20.0, 50.0) == pytest.approx(1.24 * (e / 293.15) ** (1 / 7), abs=2e-3)

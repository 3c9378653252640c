"""The comfort palette stays readable for colour-blind readers and in greyscale."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from walkcomfort import columns as C
from walkcomfort.report import palette as P


def _rgb1(colour: str) -> np.ndarray:
    return np.array(P._hex_to_rgb(colour), dtype=float) / 255.0


@pytest.mark.parametrize("cvd", [None, "deuteranomaly", "protanomaly", "tritanomaly"])
def test_comfort_classes_stay_apart_under_colour_vision_deficiency(cvd):
    # Reference library: colorspacious (test-only) implements the Machado et al. (2009)
    # CVD simulation (doi:10.1109/TVCG.2009.113) and the CAM02-UCS colour difference.
    from colorspacious import cspace_convert, deltaE

    cols = [_rgb1(P.COMFORT_COLOURS[c]) for c in C.COMFORT_CLASSES]
    if cvd is not None:
        space = {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}
        cols = [np.clip(cspace_convert(c, space, "sRGB1"), 0, 1) for c in cols]
    diffs = [float(deltaE(a, b, input_space="sRGB1", uniform_space="CAM02-UCS"))
             for a, b in itertools.combinations(cols, 2)]
    # ΔE' of about 20+ in CAM02-UCS reads as clearly different at a glance (common practice);
    # demand more than that for every pair under full dichromacy.
    assert min(diffs) > 30.0, diffs


@pytest.mark.parametrize("cvd", [None, "deuteranomaly", "protanomaly", "tritanomaly"])
@pytest.mark.parametrize("ramp", sorted(P.RAMPS))
def test_adjacent_classes_of_every_ramp_stay_apart_under_colour_vision_deficiency(ramp, cvd):
    # Reference library: colorspacious (test-only), Machado et al. (2009) CVD simulation at full
    # severity (the dichromacies deuteranopia, protanopia, tritanopia) and CAM02-UCS ΔE'.
    from colorspacious import cspace_convert, deltaE

    cols = [_rgb1(c) for c in P.RAMPS[ramp]]
    if cvd is not None:
        space = {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}
        cols = [np.clip(cspace_convert(c, space, "sRGB1"), 0, 1) for c in cols]
    diffs = [float(deltaE(a, b, input_space="sRGB1", uniform_space="CAM02-UCS")) for a, b in zip(cols[:-1], cols[1:],
                                                                                                 strict=True)]
    # neighbouring classes of an ordered ramp must read as different steps at a glance: ΔE' ≥ 10
    # (about five just-noticeable differences; common practice for map classes)
    assert min(diffs) >= 10.0, (ramp, cvd, [round(d, 1) for d in diffs])


def test_no_ramp_reuses_the_published_utci_chart_hues():
    # our "no thermal stress" is a pale neutral, not the green of the published chart's convention
    from colorspacious import cspace_convert

    j, c, h = cspace_convert(_rgb1(P.UTCI_BAND_COLOURS["no thermal stress"]), "sRGB1", "JCh")
    assert j > 90 and c < 10
    # heat and cold sides darken away from it (read in greyscale too)
    lightness = [float(cspace_convert(_rgb1(x), "sRGB1", "JCh")[0]) for x in P.UTCI_BAND_COLOURS.values()]
    peak = lightness.index(max(lightness))
    assert list(P.UTCI_BAND_COLOURS)[peak] == "no thermal stress"
    assert all(np.diff(lightness[:peak + 1]) > 0) and all(np.diff(lightness[peak:]) < 0)


def test_comfort_classes_differ_in_lightness_for_greyscale_print():
    from colorspacious import cspace_convert

    lightness = [float(cspace_convert(_rgb1(P.COMFORT_COLOURS[c]), "sRGB1", "JCh")[0]) for c in C.COMFORT_CLASSES]
    assert min(abs(a - b) for a, b in itertools.combinations(lightness, 2)) > 20.0, lightness


def test_sequential_ramps_are_monotone_in_lightness():
    for stops, falling in ((P.SHADE_STOPS, True), (P.ERROR_STOPS, True), (P.NETWORK_HOURS_STOPS, True)):
        lum = [P.relative_luminance(P.ramp(stops, v)) for v in np.linspace(0, 1, 21)]
        steps = np.diff(lum)
        assert (steps < 0).all() if falling else (steps > 0).all()


def test_ramp_ends_and_missing():
    assert P.ramp(P.SHADE_STOPS, 0.0) == P.SHADE_STOPS[0]
    assert P.ramp(P.SHADE_STOPS, 1.0) == P.SHADE_STOPS[-1]
    assert P.ramp(P.SHADE_STOPS, 7.0) == P.SHADE_STOPS[-1]  # clipped
    assert P.ramp(P.SHADE_STOPS, float("nan")) == P.MISSING_COLOUR
    assert P.comfort_colour("not a class") == P.MISSING_COLOUR


def test_contrast_ratio_matches_wcag_definition():
    # WCAG 2.1 §1.4.3 definition: black on white is 21:1, identical colours 1:1.
    assert P.contrast_ratio("#000000", "#ffffff") == pytest.approx(21.0)
    assert P.contrast_ratio("#777777", "#777777") == pytest.approx(1.0)
    # WCAG 2.1 understanding doc: #777777 on white is about 4.48:1 (from memory).
    assert P.contrast_ratio("#777777", "#ffffff") == pytest.approx(4.48, abs=0.01)


def test_every_route_colour_contrasts_with_its_halo():
    # the light colours are drawn on a dark halo; 3:1 is WCAG's minimum for graphics (1.4.11)
    for colour in list(P.COMFORT_COLOURS.values()) + [P.shade_colour(0.0)]:
        if P.relative_luminance(colour) > 0.2:
            assert P.contrast_ratio(colour, P.HALO_COLOUR) >= 3.0, colour


def test_utci_band_colours_cover_the_assessment_scale_in_order():
    names = [b[2] for b in C.UTCI_BANDS]
    assert list(P.UTCI_BAND_COLOURS) == names
    # the band lookup follows the glossary bounds (lower exclusive, upper inclusive)
    assert P.utci_band_name(26.0) == "no thermal stress"
    assert P.utci_band_name(26.01) == "moderate heat stress"
    assert P.utci_band_name(46.5) == "extreme heat stress"
    assert P.utci_band_name(-40.0) == "extreme cold stress"
    assert P.utci_band_name(float("nan")) is None

"""Scene cues: Excess Green, greenery and sky shares, brightness."""

from __future__ import annotations

import numpy as np
import pytest
from skimage import data

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.imagery import cues


def test_excess_green_worked_values():
    # from the definition (Woebbecke et al. 1995): r=60/220, g=120/220, b=40/220,
    # ExG = 2g - r - b = (240 - 60 - 40)/220 = 140/220 = 0.6364
    assert cues.excess_green(np.array([60, 120, 40])) == pytest.approx(0.6364, abs=5e-5)
    # any grey has r = g = b = 1/3, so ExG = 0; black is defined as 0 too
    for v in (0, 1, 77, 128, 255):
        assert cues.excess_green(np.array([v, v, v])) == pytest.approx(0.0, abs=1e-7)
    # pure green and pure blue, from the definition: 2 and -1
    assert cues.excess_green(np.array([0, 200, 0])) == pytest.approx(2.0)
    assert cues.excess_green(np.array([0, 0, 200])) == pytest.approx(-1.0)


def test_chromatic_coordinates_sum_to_one():
    rgb = np.random.default_rng(3).integers(1, 256, (50, 3))
    r, g, b = cues.chromatic_coordinates(rgb)
    np.testing.assert_allclose(r + g + b, 1.0, rtol=1e-6)
    # from the definition: (60, 120, 40) -> (0.2727, 0.5455, 0.1818)
    r, g, b = cues.chromatic_coordinates(np.array([60, 120, 40]))
    assert (float(r), float(g), float(b)) == pytest.approx((60 / 220, 120 / 220, 40 / 220))


def test_fast_path_matches_definition(street):
    rgb, _ = street
    # excess green ExG = 2g − r − b on chromatic coordinates (Woebbecke et al. 1995, from memory):
    # the fast uint8 path must equal the definition
    fast, _total = cues._exg_u8(rgb)
    np.testing.assert_allclose(fast, cues.excess_green(rgb), atol=1e-6)


def test_otsu_threshold_splits_two_modes():
    # two well separated groups: Otsu's threshold falls between them (Otsu 1979)
    rng = np.random.default_rng(0)
    v = np.concatenate([rng.normal(0.0, 0.02, 5000), rng.normal(0.5, 0.02, 2000)])
    t = cues.otsu_threshold(v)
    assert v[:5000].max() < t < v[5000:].min()
    assert 0.2 < t < 0.3   # the middle of the empty gap between the modes


def test_otsu_threshold_matches_scikit_image():
    # reference implementation: skimage.filters.threshold_otsu, on overlapping modes
    # (no flat plateau) the two agree within one histogram bin
    from skimage.filters import threshold_otsu

    rng = np.random.default_rng(5)
    v = np.concatenate([rng.normal(0.0, 0.1, 6000), rng.normal(0.4, 0.1, 3000)])
    bin_width = (v.max() - v.min()) / 256
    assert cues.otsu_threshold(v) == pytest.approx(threshold_otsu(v, nbins=256), abs=1.5 * bin_width)
    assert np.isnan(cues.otsu_threshold(np.full(10, 0.3)))


@pytest.mark.parametrize("threshold", [cues.EXG_THRESHOLD, "otsu"])
def test_green_fraction_recovered(make_street, threshold):
    # synthetic frames whose vegetation share is known exactly (drawn in conftest)
    for seed in range(3):
        rgb, truth = make_street(seed)
        assert cues.green_fraction(rgb, threshold) == pytest.approx(truth["green_frac"], abs=0.01)


def test_green_otsu_floor_keeps_bare_frames_bare():
    # a frame with no vegetation: grey with sensor-like noise (sigma 5 levels). Otsu alone
    # splits it in two near the middle of its one mode; the floor keeps the share near zero.
    rgb = (np.random.default_rng(1).normal(128, 5, (120, 160, 3))).clip(0, 255).astype(np.uint8)
    assert cues.green_fraction(rgb, "otsu", otsu_floor=-1.0) > 0.2
    assert cues.green_fraction(rgb, "otsu") < 0.02


@pytest.mark.parametrize("sky", ["clear", "overcast"])
def test_sky_fraction_recovered(make_street, sky):
    for seed in range(3):
        rgb, truth = make_street(seed, sky=sky)
        # the synthetic frame's sky share is known exactly (drawn in conftest); 2 % is the test's tolerance
        assert cues.sky_fraction(rgb) == pytest.approx(truth["sky_frac"], abs=0.02)


def test_sky_rule_rejects_blue_objects_and_warm_walls():
    h, w = 240, 320
    rgb = np.full((h, w, 3), 100, np.uint8)
    rgb[:80] = (110, 160, 225)              # sky band touching the top
    rgb[120:200, 20:120] = (40, 80, 200)     # a blue car low in the frame: below the upper field
    rgb[90:130, 200:280] = (60, 110, 220)    # a blue sign in the upper field (4 % of the frame), apart from the sky
    mask = cues.sky_mask(rgb)
    # the 7x7 texture window sees the grey edge below: the last 3 sky rows are lost
    assert mask[:77].all()
    assert not mask[80:].any()
    assert not mask[120:200, 20:120].any()
    assert not mask[90:140, 200:300].any()
    # a bright warm-white wall reaching the top is not overcast sky (blue below red)
    wall = np.full((h, w, 3), (240, 236, 224), np.uint8)
    assert cues.sky_fraction(wall) == 0.0
    # ... but a bright neutral overcast sky is
    overcast = np.full((h, w, 3), (228, 230, 234), np.uint8)
    assert cues.sky_fraction(overcast) == pytest.approx(cues.SKY_UPPER_FIELD, abs=0.01)


def test_sky_below_a_crown_fringing_the_top_edge():
    # a tree crown hangs across the whole top edge; the open sky below it does not reach
    # the edge but is a large region, so it is sky
    rng = np.random.default_rng(4)
    h, w = 240, 320
    rgb = np.full((h, w, 3), 100, np.uint8)
    rgb[:110] = (110, 160, 225)
    rgb[:20] = (np.array([50, 110, 40]) + rng.normal(0, 15, (20, w, 3))).clip(0, 255).astype(np.uint8)
    assert cues.sky_fraction(rgb) == pytest.approx((110 - 20) / h, abs=0.03)
    # ... unless the rule is asked for top-edge contact only
    assert cues.sky_fraction(rgb, cues.CueParams(sky_min_region_frac=1.0, sky_top_band=0.0)) == 0.0
    # a deeper crown (a quarter of the rows): the sky below starts lower but is a large region
    rgb[:60] = (np.array([50, 110, 40]) + rng.normal(0, 15, (60, w, 3))).clip(0, 255).astype(np.uint8)
    assert cues.sky_fraction(rgb) == pytest.approx((110 - 60) / h, abs=0.03)


def test_sky_needs_low_texture():
    rng = np.random.default_rng(2)
    rgb = np.full((240, 320, 3), (110, 160, 225), np.float32)
    rgb += rng.normal(0, 30, rgb.shape)      # blue but strongly textured (a blue patterned façade)
    assert cues.sky_fraction(rgb.clip(0, 255).astype(np.uint8)) < 0.05


def test_brightness_fraction_from_definition():
    # BT.601 luma of (255, 0, 0) is 0.299; of white 1; of black 0
    red = np.zeros((16, 16, 3), np.uint8)
    red[..., 0] = 255
    assert cues.brightness_fraction(red) == pytest.approx(0.299, abs=1 / 255)
    assert cues.brightness_fraction(np.full((16, 16, 3), 255, np.uint8)) == pytest.approx(1.0)
    assert cues.brightness_fraction(np.zeros((16, 16, 3), np.uint8)) == 0.0


def test_frame_cues_keys_and_gvi(street):
    rgb, truth = street
    c = cues.frame_cues(rgb)
    assert set(c) >= {C.SKY_FRAC, C.GREEN_FRAC, C.BRIGHTNESS_FRAC, "green_px", "total_px"}
    assert c[C.GREEN_FRAC] == pytest.approx(c["green_px"] / c["total_px"])
    # Green View Index pools pixels over views (Li et al. 2015): (10 + 30) / (100 + 100) = 20 %
    assert cues.green_view_index([10, 30], [100, 100]) == pytest.approx(20.0)
    assert cues.green_view_index([c["green_px"]], [c["total_px"]]) == pytest.approx(100 * truth["green_frac"], abs=1.0)
    with pytest.raises(InputError):
        cues.green_view_index([5], [4])


def test_bad_inputs_are_one_line_errors():
    with pytest.raises(InputError) as e:
        cues.frame_cues(np.zeros((10, 10)))
    assert "\n" not in str(e.value) and "(H, W, 3)" in str(e.value)
    with pytest.raises(InputError):
        cues.CueParams(exg_threshold="mean")
    with pytest.raises(InputError):
        cues.CueParams(sky_upper_field=0)


@pytest.mark.parametrize("func", [cues.chromatic_coordinates, cues.excess_green])
def test_colour_functions_refuse_arrays_without_three_channels(func):
    with pytest.raises(InputError, match="3 channels") as exc:
        func(np.zeros((4, 4, 4)))
    assert "Fix:" in str(exc.value) and "\n" not in str(exc.value)


@pytest.mark.parametrize("colour", [(255, 210, 0), (255, 255, 0), (204, 119, 34), (230, 190, 60), (196, 160, 40)])
def test_yellow_and_ochre_are_not_greenery(colour):
    # solid yellow, ochre, mustard and straw patches: Excess Green is positive for several of
    # them (255, 210, 0 gives 0.355), but their hue is below 65° (pure yellow is 60°)
    img = np.zeros((32, 32, 3), np.uint8)
    img[:] = colour
    assert cues.green_fraction(img) == 0.0
    assert cues.frame_cues(img)[C.GREEN_FRAC] == 0.0


@pytest.mark.parametrize("colour", [(60, 140, 40), (120, 160, 60), (40, 90, 50), (90, 150, 110)])
def test_leaf_greens_stay_greenery(colour):
    # foliage colours from sunlit (120, 160, 60: hue 84°) to shaded (40, 90, 50: hue 132°)
    img = np.zeros((32, 32, 3), np.uint8)
    img[:] = colour
    assert cues.green_fraction(img) == 1.0


def test_green_pixels_of_the_colour_wheel_lie_between_65_and_180_degrees():
    import colorsys

    # scikit-image's colour wheel holds every hue: only the green sector may be counted
    wheel = data.colorwheel()[..., :3]
    mask = cues.green_mask(wheel)
    hues = np.array([colorsys.rgb_to_hsv(*(px / 255.0))[0] * 360 for px in wheel[mask][::50]])
    assert mask.mean() > 0.1
    assert hues.min() >= cues.GREEN_MIN_HUE_DEG - 0.5 and hues.max() <= 180.5


@pytest.mark.parametrize("name", ["chelsea", "coffee"])
def test_photographs_without_vegetation_have_no_greenery(name):
    # scikit-image's orange cat and coffee cup photographs contain no plant
    assert cues.green_fraction(getattr(data, name)()) <= 0.001

"""The route map coloured by PET classes (map --index pet), in a real headless Chromium."""

from __future__ import annotations

import _report_synth as S
import numpy as np
import pytest

from walkcomfort.errors import InputError
from walkcomfort.report import map as R

pytestmark = pytest.mark.browser

READY = "html[data-walkcomfort-ready]"


def _with_pet():
    pts = S.predictions()
    # invented PET values spanning three classes: slightly warm, warm, hot (Matzarakis & Mayer 1996)
    pts["pet_c"] = np.linspace(25.0, 38.0, len(pts))
    return pts


def test_pet_needs_a_table_with_pet():
    with pytest.raises(InputError, match="--index pet"):
        R.route_map(S.predictions(), index="pet")


def test_pet_payload_and_legend_scale():
    fmap = R.route_map(_with_pet(), index="pet")
    cfg = fmap.data["cfg"]
    assert cfg["index"]["key"] == "pet"
    assert [k["name"] for k in cfg["utci"]][4] == "comfortable"  # PET classes replace the route bands
    assert len(cfg["street_utci"]) == 10  # streets keep the UTCI assessment scale
    combo = next(c for c in fmap.data["routes"]["combos"].values() for c in c if c)
    assert "pet" in combo and max(combo["band"]) <= 8


def test_pet_colouring_in_the_browser(browser, served, tmp_path, artifacts_dir):
    R.write_map(R.route_map(_with_pet(), scene=S.scene(), schemes=[S.scheme()], index="pet"), tmp_path / "map.html")
    browser.allowed_origin = served.origin
    page = browser.new_page(1280, 860)
    page.goto(served.url("map.html"))
    page.wait_for_selector(READY, timeout=15_000)
    page.locator(".wc-colourings input[value=utci]").check()
    assert "PET class" in page.locator(".wc-colourings").inner_text()
    legend = page.locator(".wc-sec[data-kind=routes-utci]").inner_text()
    assert "PET classes" in legend and "Warm (moderate heat stress)" in legend
    page.screenshot(path=str(artifacts_dir / "map_pet_classes.png"))

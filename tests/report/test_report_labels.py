"""One labelling table: every column a summary shows has a plain label, a unit and one number format."""

from __future__ import annotations

import pandas as pd
import pytest

from walkcomfort import labels as L
from walkcomfort.routes import outputs as O
from walkcomfort.routes.compare import DELTA_COLUMNS


def test_every_shown_column_has_a_label():
    shown = set(O.SUMMARY_COLS + O.COMPARE_COLS + O.BEST_COLS + O.COST_COLS)
    shown |= {f"delta_{c}" for c in DELTA_COLUMNS} | {f"base_{c}" for c in DELTA_COLUMNS}
    shown |= {"from_m", "to_m", "delta_exp_share_comfortable", "wbgt_min_above_limit", "mean_pet_c"}
    for col in sorted(shown):
        lab = L.label_of(col)  # raises KeyError for a column without a label
        assert lab.text and not lab.text.startswith(col), col
    assert L.header("walk_min") == "Walk time [min]"
    assert L.header("delta_shade_share") == "Change in sunlit time in shade [points]"
    assert L.header("delta_exp_min_comfortable_lo") == "Change in expected comfortable time, lower bound [min]"


@pytest.mark.parametrize(("col", "value", "text"), [
    ("points_n", 12.0, "12"),                       # counts as integers, never 12.000
    ("shade_share", 0.4567, "46 %"),                # shares as per cent
    ("delta_shade_share", 0.114, "+11"),            # a change of a share in percentage points
    ("delta_mean_utci_c", -0.6068, "-0.6"),
    ("delta_heat_dose_cmin", 0.0004, "0"),          # rounding noise shows as 0, not +0 or -0
    ("mean_utci_c", 27.4412, "27.4"),
    ("heat_dose_cmin", 36.14, "36"),
    ("within_model_error", True, "yes"),
    ("exp_min_comfortable", float("nan"), "–"),
])
def test_one_format_per_kind(col, value, text):
    assert L.format_value(col, value) == text


def test_times_are_shown_in_the_local_zone():
    t = pd.Timestamp("2026-07-15T07:00:00Z")
    assert L.format_value("departure", t, "Europe/Madrid") == "2026-07-15 09:00"
    local = O.with_local_times(pd.DataFrame({"departure": [t]}), "Europe/Madrid")
    assert list(local.columns) == ["departure", "departure_local"]
    assert local["departure_local"].iloc[0].isoformat() == "2026-07-15T09:00:00+02:00"
    csv = O.csv_ready(local)
    assert csv["departure"].iloc[0] == "2026-07-15T07:00:00+00:00"  # to the second, no microseconds

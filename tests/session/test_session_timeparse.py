"""Time conventions of field loggers parse to the right instants (common practice conventions, named below)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort.errors import InputError
from walkcomfort.session.readers import timeparse as tp


def _s(*v):
    return pd.Series([str(x) for x in v], dtype=object)


def test_hhmm_without_padding_is_hour_and_minute():
    # array-based data loggers write the time of day as hour*100 + minute: 01:20 is 120, midnight 0
    ns, bad = tp._clock_number(_s(120, 5, 0, 1200, 2359, 2400), "HHMM")
    assert list(ns // 60_000_000_000) == [80, 5, 0, 720, 1439, 1440]
    assert not bad.any()


def test_hhmm_rejects_impossible_minutes():
    _, bad = tp._clock_number(_s(160, 2401, -5, 12.5, "x"), "HHMM")
    assert bad.all()


def test_year_doy_hhmm_columns_give_the_instant():
    parts = [_s(2026, 2026, 2024), _s(195, 1, 366), _s(120, 0, 2359)]
    out, reason = tp.parse_parts(parts, ("YEAR", "DOY", "HHMM"), ["Y", "D", "T"], "f.csv")
    assert list(pd.DatetimeIndex(out)) == [pd.Timestamp("2026-07-14 01:20"), pd.Timestamp("2026-01-01 00:00"),
                                           pd.Timestamp("2024-12-31 23:59")]   # 2024 is a leap year: day 366
    assert (reason == "").all()


def test_day_366_of_a_common_year_is_bad():
    out, reason = tp.parse_parts([_s(2026), _s(366)], ("YEAR", "DOY"), ["Y", "D"], "f.csv")
    assert list(reason) == ["bad_time"]


def test_fractional_day_of_year_is_time_of_day():
    out, _ = tp.parse_parts([_s(2026), _s(195.5)], ("YEAR", "DOY"), ["Y", "D"], "f.csv")
    assert pd.Timestamp(out[0]) == pd.Timestamp("2026-07-14 12:00")


def test_date_column_and_hhmmss():
    out, _ = tp.parse_parts([_s("14/07/2026"), _s(95905)], ("%d/%m/%Y", "HHMMSS"), ["D", "T"], "f.csv")
    assert pd.Timestamp(out[0]) == pd.Timestamp("2026-07-14 09:59:05")


@pytest.mark.parametrize("fmt, value", [("epoch_s", 1784016000), ("epoch_ms", 1784016000000),
                                        ("epoch_us", 1784016000000000)])
def test_epoch_units_parse_to_the_same_instant(fmt, value):
    # Unix time: seconds since 1970-01-01T00:00Z, not counting leap seconds (POSIX)
    ns, reason = tp.parse_epoch(_s(value), fmt, "f.csv")
    assert pd.Timestamp(ns[0]) == pd.Timestamp("2026-07-14 08:00:00")
    assert reason[0] == ""


def test_milliseconds_declared_as_seconds_are_refused_with_the_fix():
    with pytest.raises(InputError, match='time_format = "epoch_ms"') as info:
        tp.parse_epoch(_s(1784016000000, 1784016001000), "epoch_s", "f.csv", lines=np.array([2, 3]))
    assert "f.csv:2" in str(info.value)


def test_a_pattern_that_would_drop_a_digit_is_refused():
    with pytest.raises(InputError, match="drop a digit") as info:
        tp.refuse_digit_runs([_s("2026-07-14 1200", "2026-07-14 120")], ["time"], "%Y-%m-%d %H%M", "f.csv",
                             lines=np.array([2, 3]))
    assert "f.csv:3" in str(info.value) and "HHMM" in str(info.value)


def test_padded_compact_pattern_is_fine():
    tp.refuse_digit_runs([_s("20260714 0120", "20260714 1200")], ["time"], "%Y%m%d %H%M", "f.csv")


def test_plain_numbers_in_a_separate_time_column_are_refused_under_iso():
    with pytest.raises(InputError, match="HHMM"):
        tp.refuse_digit_runs([_s("2026-07-14", "2026-07-14"), _s("959", "1000")], ["Date", "Time"], None, "f.csv")


@pytest.mark.parametrize("fmt, n, ok", [(["%Y-%m-%d", "HHMM"], 2, True), (["YEAR", "DOY", "HHMM"], 3, True),
                                        (["DOY", "HHMM"], 2, False), (["HHMM"], 1, False),
                                        (["%Y-%m-%d"], 2, False), ("HHMM", 1, False), (["%Y", "HH"], 2, False)])
def test_manifest_time_format_checks(fmt, n, ok):
    if ok:
        assert tp.check_time_format(fmt, n, "m") == tuple(fmt)
    else:
        with pytest.raises(InputError):
            tp.check_time_format(fmt, n, "m")

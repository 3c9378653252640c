"""network --speed: the segment walks take the flat walking speed of the routes' options."""

from __future__ import annotations

import json

import pytest

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.network.synthetic import grid_network


def _plan(tmp_path, **kw):
    from walkcomfort.network.commands import plan_from_files

    streets = tmp_path / "streets.geojson"
    streets.write_text(json.dumps(grid_network(2, 2, block_m=60.0)))
    return plan_from_files(streets, None, [], "2026-07-14T12:00", "2026-07-14T13:00", "1h", "Europe/Madrid",
                           conditions="t_air_c=31,rh_pct=40,wind_ms=2", segment_length_m=60.0, **kw)


def test_a_slower_walker_takes_longer_along_each_segment(tmp_path):
    from walkcomfort.network import _physics

    _, default = _plan(tmp_path)
    _, slow = _plan(tmp_path, flat_speed_ms=0.9)
    assert "flat_speed_ms" not in default.parameters["context"]  # the default keeps the job's digest
    assert slow.parameters["context"]["flat_speed_ms"] == 0.9
    assert slow.digest != default.digest
    walks = {}
    for name, job in (("default", default), ("slow", slow)):
        part = job.partitions[0]
        w = _physics.segment_walks(part, _physics.point_environment(part))
        first = w[C.WALK_ID] == w[C.WALK_ID].iloc[0]
        times = w.index[first.to_numpy()]
        walks[name] = ((times[-1] - times[0]).total_seconds(), float(w[C.SPEED_MS].iloc[0]))
    # flat streets: the walk along a segment takes length / speed (Tobler's factor is 1 at 0 %)
    assert walks["slow"][1] == pytest.approx(0.9)
    assert walks["default"][1] == pytest.approx(1.3)
    assert walks["slow"][0] == pytest.approx(walks["default"][0] * 1.3 / 0.9, rel=1e-6)


def test_an_implausible_speed_is_one_line(tmp_path):
    with pytest.raises(InputError, match="--speed"):
        _plan(tmp_path, flat_speed_ms=12.0)

"""A partition function that kills the worker process running it (for the lost-worker test only)."""

from __future__ import annotations

import os


def kill_worker_on_first_tile(part):
    from walkcomfort.network.batch import compute_partition

    if part.tile_id == "t000_000":
        os._exit(17)  # what an out-of-memory kill or a crashed node looks like to Dask
    return compute_partition(part)

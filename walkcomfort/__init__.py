"""walkcomfort: pedestrian outdoor comfort from field walks to planned routes.

The package is organised by the direction data flows::

    session -> environment -> model -> routes -> report
               (imagery feeds frame cues into the timeline; network scales routes)

Every stage is a set of plain functions over pandas objects; the command line
(:mod:`walkcomfort.cli`) is a thin shell over them.
"""

__version__ = "0.1.0"

from walkcomfort.errors import (  # noqa: F401  (re-exported)
    DataQualityWarning,
    InputError,
    WalkcomfortError,
)

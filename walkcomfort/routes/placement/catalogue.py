"""The interventions a placement may choose from: tree types and canopy panels.

The defaults are an invented, documented starting point, not advice: replace sizes,
transmissivities and costs with those of the species and products available locally
(a JSON catalogue, :func:`load_catalogue`). Costs are in the user's own unit.

Transmissivity of the direct beam through a leaf-on crown: field measurements of
street trees in summer span about 0.05–0.3 (from memory; dense crowns such as lime and
plane at the low end, open crowns such as honey locust at the high end). A shade sail
or slatted canopy passes 0.0–0.5 by its fabric or slat spacing (manufacturer data;
common practice).
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import asdict, dataclass, fields
from pathlib import Path

from walkcomfort.errors import InputError, where

KINDS = ("tree", "canopy")


@dataclass(frozen=True)
class Intervention:
    """One kind of thing that can be put on a site.

    Parameters
    ----------
    name : str
        Catalogue key (``tree-medium``).
    kind : {"tree", "canopy"}
        What it adds to the scene.
    height_m : float
        Tree: total height; canopy: height of its underside [m].
    transmissivity : float
        Direct-beam transmittance of one crossing, leaf-on for trees [-].
    crown_radius_m, crown_base_m : float
        Tree crown radius and height of the lowest leaves [m].
    side_m : float
        Canopy: side of the square panel [m].
    unit_cost : float
        Cost of one, in the user's unit.
    years_to_size : float
        Years a tree needs to reach this size (0 for a canopy) [a].
    """

    name: str
    kind: str
    height_m: float
    transmissivity: float
    crown_radius_m: float = 0.0
    crown_base_m: float = 0.0
    side_m: float = 0.0
    unit_cost: float = 1.0
    years_to_size: float = 0.0

    @property
    def reach_m(self) -> float:
        """Half the width of the shade it casts, for screening walk points [m]."""
        return self.crown_radius_m if self.kind == "tree" else self.side_m * math.sqrt(0.5)

    @property
    def shade_area_m2(self) -> float:
        """Plan area of crown or panel [m²]."""
        return math.pi * self.crown_radius_m ** 2 if self.kind == "tree" else self.side_m ** 2

    def properties(self, feature_id: str) -> dict:
        """Scene properties of one placed item (see docs/formats/scene.md)."""
        props = {"id": feature_id, "kind": self.kind, "height_m": self.height_m,
                 "transmissivity": self.transmissivity, "source": f"placement:{self.name}"}
        if self.kind == "tree":
            props.update(crown_radius_m=self.crown_radius_m, crown_base_m=self.crown_base_m)
        return props


#: Invented defaults (see the module docstring); costs in relative units.
DEFAULT_CATALOGUE: dict[str, Intervention] = {
    "tree-small": Intervention("tree-small", "tree", 6.0, 0.25, crown_radius_m=2.0, crown_base_m=2.2,
                               unit_cost=1.0, years_to_size=8),
    "tree-medium": Intervention("tree-medium", "tree", 10.0, 0.15, crown_radius_m=3.5, crown_base_m=3.0,
                                unit_cost=1.5, years_to_size=15),
    "tree-large": Intervention("tree-large", "tree", 15.0, 0.10, crown_radius_m=5.0, crown_base_m=4.0,
                               unit_cost=2.5, years_to_size=25),
    "canopy-panel": Intervention("canopy-panel", "canopy", 3.5, 0.30, side_m=6.0, unit_cost=3.0),
}


def check_intervention(it: Intervention, loc: str) -> Intervention:
    """Refuse an intervention whose numbers cannot describe a real object."""
    if it.kind not in KINDS:
        raise InputError(f"kind {it.kind!r} is not one of {', '.join(KINDS)}", where=loc, fix="set kind")
    checks = [("height_m", it.height_m > 0), ("transmissivity", 0.0 <= it.transmissivity <= 1.0),
              ("unit_cost", it.unit_cost > 0), ("years_to_size", it.years_to_size >= 0)]
    if it.kind == "tree":
        checks += [("crown_radius_m", it.crown_radius_m > 0),
                   ("crown_base_m", 0 <= it.crown_base_m < it.height_m)]
    else:
        checks += [("side_m", it.side_m > 0)]
    for key, ok in checks:
        if not (ok and math.isfinite(float(getattr(it, key)))):
            raise InputError(f"{key} = {getattr(it, key)!r} is not allowed for a {it.kind}", where=f"{loc} {key}",
                             fix="heights and sizes > 0, crown base below the top, transmissivity 0…1, cost > 0")
    return it


def load_catalogue(path: str | os.PathLike | None) -> dict[str, Intervention]:
    """The default catalogue, or one read from a JSON object ``{name: {kind, height_m, ...}}``."""
    if path is None:
        return dict(DEFAULT_CATALOGUE)
    path = Path(path)
    try:
        obj = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError("catalogue file does not exist", where=path, fix="check the path") from None
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON ({exc.msg})", where=where(path, line=exc.lineno),
                         fix="write the catalogue as a JSON object of interventions") from None
    if not isinstance(obj, dict) or not obj:
        raise InputError("a catalogue must be a non-empty JSON object {name: {...}}", where=path,
                         fix='write e.g. {"tree-medium": {"kind": "tree", "height_m": 10, ...}}')
    allowed = {f.name for f in fields(Intervention)} - {"name"}
    out = {}
    for name, spec in obj.items():
        loc = f"{path} {name}"
        if not isinstance(spec, dict):
            raise InputError("an intervention must be a JSON object", where=loc, fix="give its kind and sizes")
        unknown = sorted(set(spec) - allowed)
        if unknown:
            raise InputError(f"unknown key(s) {unknown}; allowed {sorted(allowed)}", where=loc,
                             fix="correct the key names")
        try:
            it = Intervention(name=str(name), **{k: (v if k == "kind" else float(v)) for k, v in spec.items()})
        except (TypeError, ValueError) as exc:
            raise InputError(f"cannot read the intervention ({exc})", where=loc,
                             fix="give kind, height_m and transmissivity, numbers for the sizes") from None
        out[str(name)] = check_intervention(it, loc)
    return out


def catalogue_record(catalogue: dict[str, Intervention]) -> dict:
    """The catalogue as plain data for provenance."""
    return {k: asdict(v) for k, v in catalogue.items()}

"""Where should the shade go? Turn a planting or canopy budget into a scheme.

Candidate sites (:mod:`.sites`) × interventions from a catalogue (:mod:`.catalogue`) are
each traced once against every walk point × time (:mod:`.shadows`); a greedy selection
with lazy re-evaluation then picks the set that most improves the chosen objective
within the budget (:mod:`.select`), and :mod:`.outputs` writes a scheme GeoJSON that
``compare`` and ``map`` read like a hand-drawn one, a ranked table and a gain-versus-
budget curve.

Planning aid only: planting and canopies depend on soil, utilities, sight lines,
maintenance and local codes, and a licensed professional decides.
"""

CAUTION = ("Planning aid, not a design: candidate sites are screened only for buildings and distance to "
           "trees and facades. Planting and canopies depend on soil, underground utilities, sight lines, "
           "accessibility, maintenance and local codes; a licensed professional decides. Gains are model and "
           "physics estimates, not a heat-safety assessment.")

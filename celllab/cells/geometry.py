"""Derive a cell's full geometry from its outline and the deck's layout rules.

Units: um (lengths), um^2 (areas), counts. The outline is the same for every topology:
width = width_sites x site_width, height = height_rows x row_height. Everything inside it
(gates, diffusions, MOM fingers) follows the geometry rule of the cell's topology
(``celllab.topologies.REGISTRY``; the shared rules, core-row well halves and open regions
included, are stated in ``celllab.topologies.geometry``). The cell's rail must be one the deck
defines (core, io or a named rail).
"""

from __future__ import annotations

from typing import Any

from celllab.cells.schema import CellSpec
from celllab.topologies import REGISTRY
from celllab.topologies.geometry import Geometry, GeometryProblem, MomLayer

__all__ = ["Geometry", "GeometryProblem", "MomLayer", "resolve_geometry"]


def resolve_geometry(spec: CellSpec, deck: Any) -> Geometry:
    """Fill in every derived dimension; raises GeometryProblem naming the field at fault."""
    lay = deck.layout
    width = spec.width_sites * lay.site_width_um
    height = spec.height_rows * lay.row_height_um
    geo = Geometry(cell_width_um=width, cell_height_um=height, area_um2=width * height,
                   placement=spec.placement)
    if spec.oxide not in deck.oxides:
        raise GeometryProblem("oxide", spec.oxide, "the deck defines no such oxide flavour; allowed: "
                              + ", ".join(deck.oxides))
    if spec.rail not in deck.supplies.rail_names():
        raise GeometryProblem("rail", spec.rail, "the deck has no such supply rail; allowed: "
                              + ", ".join(deck.supplies.rail_names()))
    REGISTRY[spec.topology].geometry(spec, deck, geo)
    return geo

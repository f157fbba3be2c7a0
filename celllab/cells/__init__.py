"""Cell definitions: geometry derivation, family expansion, names and hashes (topologies: ``celllab.topologies``)."""

from celllab.cells.expand import (
    apply_cell_changes,
    cell_hash,
    load_cells,
    parse_cells,
    resolve,
    spec_from_record,
)
from celllab.cells.geometry import Geometry, MomLayer, resolve_geometry
from celllab.cells.schema import GEOMETRY_FIELDS, CellSpec

__all__ = [
    "CellSpec", "Geometry", "MomLayer", "GEOMETRY_FIELDS",
    "apply_cell_changes", "cell_hash", "load_cells", "parse_cells", "resolve", "resolve_geometry",
    "spec_from_record",
]

"""Cell definitions: topologies, geometry derivation, family expansion, names and hashes."""

from celllab.cells.expand import (
    apply_cell_changes,
    cell_hash,
    load_cells,
    parse_cells,
    resolve,
    spec_from_record,
)
from celllab.cells.geometry import Geometry, MomLayer, resolve_geometry
from celllab.cells.schema import ESD_SAFE_TOPOLOGIES, GEOMETRY_FIELDS, TOPOLOGIES, CellSpec

__all__ = [
    "CellSpec", "Geometry", "MomLayer", "TOPOLOGIES", "GEOMETRY_FIELDS", "ESD_SAFE_TOPOLOGIES",
    "apply_cell_changes", "cell_hash", "load_cells", "parse_cells", "resolve", "resolve_geometry",
    "spec_from_record",
]

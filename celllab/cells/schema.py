"""Cell definitions: one decap variant (``CellSpec``) and the family that sweeps into variants.

Geometry fields use um, sites and rows (units in the names). Fields left out are derived from
the cell outline by the rules of the cell's topology (``celllab.topologies``); which topologies
exist, which fields apply to each and which are ESD-safe come from ``topologies.REGISTRY``.
"""

from __future__ import annotations

from typing import Any, Literal

from pydantic import Field, field_validator, model_validator
from pydantic_core import PydanticCustomError

from celllab.strict import StrictModel
from celllab.topologies import REGISTRY
from celllab.topologies.geometry import Placement

OxideChoice = Literal["core", "io"]

#: Fields a family may sweep (scalar, list or range), in the order they appear in variant names.
GEOMETRY_FIELDS: tuple[str, ...] = (
    "width_sites", "height_rows", "placement", "fingers", "gate_length_um", "gate_width_um", "contacted_ends",
    "gate_contacted_ends", "accumulation_well", "mos_device", "mom_bottom", "mom_top",
    "finger_width_um", "finger_space_um", "mom_alternate",
)
#: Short tags for variant names.
NAME_TAGS: dict[str, str] = {
    "width_sites": "w", "height_rows": "h", "placement": "", "fingers": "f", "gate_length_um": "L",
    "gate_width_um": "W", "contacted_ends": "e", "gate_contacted_ends": "g",
    "accumulation_well": "well", "mos_device": "", "mom_bottom": "", "mom_top": "to",
    "finger_width_um": "fw", "finger_space_um": "fs", "mom_alternate": "alt",
}


class CellSpec(StrictModel):
    """One cell variant as the user defined it (before geometry derivation)."""

    name: str = Field(pattern=r"^[A-Za-z][A-Za-z0-9_\-\.]{0,79}$", description="variant name")
    family: str = Field("", pattern=r"^([A-Za-z][A-Za-z0-9_\-\.]{0,79})?$",
                        description="family this variant came from")
    topology: str = Field(description="decap topology (see celllab.topologies.REGISTRY)")
    oxide: OxideChoice = Field("core", description="gate-oxide flavour: core (thin) or io (thick)")
    rail: str = Field("", pattern=r"^$|^[a-z][a-z0-9_]{0,23}$",
                      description="supply rail the cell decouples and is characterized at: core, io or a "
                      "rail named in the deck's [supplies.named]; omitted: the rail of the same name as "
                      "the oxide (independent of it when given)")
    placement: Placement = Field("core_row", description="where the cell sits: core_row (a standard-cell "
                                 "row, NMOS on the p-well half, PMOS on the n-well half) or open_region "
                                 "(no row structure: I/O-ring spacers, corner cells, pad-ring gaps)")
    width_sites: int = Field(ge=1, le=4096, description="cell width, placement sites")
    height_rows: int = Field(1, ge=1, le=64, description="cell height, placement rows")
    fingers: int = Field(1, ge=1, le=1024, description="gate fingers per device")
    gate_length_um: float | None = Field(None, gt=0, le=100, description="drawn gate length, um; "
                                         "omitted: the gates fill the cell width")
    gate_width_um: float | None = Field(None, gt=0, le=1000, description="gate width per finger and "
                                        "row, um; omitted: the diffusion fills the row")
    contacted_ends: Literal[1, 2] = Field(2, description="channel contacted at one end or both ends")
    gate_contacted_ends: Literal[1, 2] = Field(1, description="each gate finger strapped at one end or both")
    accumulation_well: Literal["n", "p"] = Field("n", description="accumulation cells: n+ gate in n-well "
                                                 "or p+ gate in p-well")
    mos_device: Literal["nmos", "pmos"] = Field("nmos", description="mos_mom cells: device under the fingers")
    mom_bottom: str | None = Field(None, description="lowest MOM finger layer; omitted: the layer above the rails")
    mom_top: str | None = Field(None, description="highest MOM finger layer; omitted: two layers above the bottom")
    finger_width_um: float | None = Field(None, gt=0, le=10, description="MOM finger width, um; omitted: each "
                                          "layer's minimum")
    finger_space_um: float | None = Field(None, gt=0, le=10, description="MOM finger spacing, um; omitted: "
                                          "each layer's minimum")
    mom_alternate: bool = Field(False, description="alternate finger polarity between layers (adds vertical plates)")

    @field_validator("topology")
    @classmethod
    def _known_topology(cls, value: str) -> str:
        if value not in REGISTRY:
            names = REGISTRY.names()
            expected = ", ".join(repr(n) for n in names[:-1]) + f" or {names[-1]!r}" if len(names) > 1 \
                else repr(names[0])
            raise PydanticCustomError("literal_error", "Input should be {expected}", {"expected": expected})
        return value

    @model_validator(mode="before")
    @classmethod
    def _rail_follows_oxide_unless_given(cls, data: Any) -> Any:
        if isinstance(data, dict) and not data.get("rail"):
            oxide = data.get("oxide", "core")
            return {**data, "rail": oxide if isinstance(oxide, str) else ""}
        return data

    @model_validator(mode="after")
    def _placement_allowed(self) -> "CellSpec":
        allowed = REGISTRY.placements_of(self.topology)
        if self.placement not in allowed:
            raise ValueError(f"placement {self.placement!r} is not allowed for {self.topology} cells; "
                             "allowed: " + ", ".join(allowed))
        return self

    @model_validator(mode="after")
    def _topology_fields(self) -> "CellSpec":
        applies = REGISTRY[self.topology].fields
        for f in GEOMETRY_FIELDS:
            derived = type(self).model_fields[f].default is None  # a field left out is derived
            if derived and f not in applies and getattr(self, f) is not None:
                users = REGISTRY.users_of(f)
                listed = ", ".join(users[:-1]) + f" and {users[-1]}" if len(users) > 1 else "".join(users)
                raise ValueError(f"{f} applies to {listed} cells only, not {self.topology}")
        return self

    @property
    def geometry(self) -> dict[str, Any]:
        """The user-editable geometry fields and their values."""
        return {f: getattr(self, f) for f in GEOMETRY_FIELDS}

    @property
    def esd_safe(self) -> bool:
        """True when no gate of this cell is tied directly to a supply rail."""
        return REGISTRY[self.topology].esd_safe

    @property
    def content_hash(self) -> str:
        from celllab.cells.expand import cell_hash

        return cell_hash(self)

    def with_changes(self, changes: dict[str, Any], deck: Any = None, name: str | None = None,
                     source: str = "<what-if>") -> "CellSpec":
        """A validated copy with geometry fields changed (checked against ``deck`` when given)."""
        from celllab.cells.expand import apply_cell_changes

        return apply_cell_changes(self, changes, deck, name=name, source=source)

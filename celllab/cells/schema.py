"""Cell definitions: one decap variant (``CellSpec``) and the family that sweeps into variants.

Geometry fields use um, sites and rows (units in the names). Fields left out are derived from
the cell outline by the rules in ``celllab.cells.geometry``.
"""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

Topology = Literal["nmos_inversion", "pmos_inversion", "accumulation", "cross_coupled", "mom", "mos_mom"]
TOPOLOGIES: tuple[str, ...] = Topology.__args__  # type: ignore[attr-defined]
OxideChoice = Literal["core", "io"]

#: Topologies with a MOS gate, and with metal fingers.
MOS_TOPOLOGIES = frozenset({"nmos_inversion", "pmos_inversion", "accumulation", "cross_coupled", "mos_mom"})
MOM_TOPOLOGIES = frozenset({"mom", "mos_mom"})
#: No gate tied directly to a supply rail.
ESD_SAFE_TOPOLOGIES = frozenset({"cross_coupled", "mom"})

#: Fields a family may sweep (scalar, list or range), in the order they appear in variant names.
GEOMETRY_FIELDS: tuple[str, ...] = (
    "width_sites", "height_rows", "fingers", "gate_length_um", "gate_width_um", "contacted_ends",
    "gate_contacted_ends", "accumulation_well", "mos_device", "mom_bottom", "mom_top",
    "finger_width_um", "finger_space_um", "mom_alternate",
)
#: Short tags for variant names.
NAME_TAGS: dict[str, str] = {
    "width_sites": "w", "height_rows": "h", "fingers": "f", "gate_length_um": "L",
    "gate_width_um": "W", "contacted_ends": "e", "gate_contacted_ends": "g",
    "accumulation_well": "well", "mos_device": "", "mom_bottom": "", "mom_top": "to",
    "finger_width_um": "fw", "finger_space_um": "fs", "mom_alternate": "alt",
}


class CellSpec(BaseModel):
    """One cell variant as the user defined it (before geometry derivation)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    name: str = Field(pattern=r"^[A-Za-z][A-Za-z0-9_\-\.]{0,79}$", description="variant name")
    family: str = Field("", pattern=r"^([A-Za-z][A-Za-z0-9_\-\.]{0,79})?$",
                        description="family this variant came from")
    topology: Topology = Field(description="decap topology")
    oxide: OxideChoice = Field("core", description="gate-oxide flavour: core (thin) or io (thick)")
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

    @model_validator(mode="after")
    def _topology_fields(self) -> "CellSpec":
        if self.topology not in MOM_TOPOLOGIES:
            for f in ("mom_bottom", "mom_top", "finger_width_um", "finger_space_um"):
                if getattr(self, f) is not None:
                    raise ValueError(f"{f} applies to mom and mos_mom cells only, not {self.topology}")
        if self.topology == "mom":
            for f in ("gate_length_um", "gate_width_um"):
                if getattr(self, f) is not None:
                    raise ValueError(f"{f} does not apply to a mom cell (no gate)")
        return self

    @property
    def geometry(self) -> dict[str, Any]:
        """The user-editable geometry fields and their values."""
        return {f: getattr(self, f) for f in GEOMETRY_FIELDS}

    @property
    def esd_safe(self) -> bool:
        return self.topology in ESD_SAFE_TOPOLOGIES

    @property
    def content_hash(self) -> str:
        from celllab.cells.expand import cell_hash

        return cell_hash(self)

    def with_changes(self, changes: dict[str, Any], deck: Any = None, name: str | None = None,
                     source: str = "<what-if>") -> "CellSpec":
        """A validated copy with geometry fields changed (checked against ``deck`` when given)."""
        from celllab.cells.expand import apply_cell_changes

        return apply_cell_changes(self, changes, deck, name=name, source=source)

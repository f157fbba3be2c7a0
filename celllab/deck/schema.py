"""Process deck model (pydantic v2).

Every numeric field carries its unit in its name (``t_ox_nm``, ``doping_cm3``) and a physical
range check; descriptions say what the field means. Values are stored as the user typed them;
``celllab.engine`` converts to SI once.
"""

from __future__ import annotations

import re
import warnings
from typing import Any, Literal

from pydantic import (
    Field,
    SerializationInfo,
    SerializerFunctionWrapHandler,
    model_serializer,
    model_validator,
)

from celllab.physics.constants import EPS_R_SIO2
from celllab.strict import StrictModel
from celllab.units import to_si

GateMaterial = Literal["n_poly", "p_poly", "metal"]
AccelerationModel = Literal["power_law", "e_model", "inverse_e"]
LeakageModel = Literal["direct_tunnel", "reference"]
OxideName = Literal["core", "io"]

#: Documented input limits (process_decks/README.md, "Limits"): enough for any process and
#: small enough that checking a deck stays quick.
MAX_CORNERS = 100
MAX_METALS = 32
MAX_NAMED_RAILS = 32
#: Words the catalog and the CLI use for a cell's aggregate over its corners (``--corner worst``);
#: a corner of that name would be hidden by the aggregate.
RESERVED_CORNER_NAMES: tuple[str, ...] = ("worst", "best", "all")
CORNER_NAME = re.compile(r"[A-Za-z0-9_-]{1,40}")


#: ``model_dump(context=FULL_DUMP)`` keeps every field (dotted paths of corners and what-ifs
#: reach fields at their defaults too); the plain dump is the canonical one.
FULL_DUMP: dict[str, bool] = {"celllab_full_dump": True}


def _without_defaults(data: dict[str, Any], defaults: dict[str, Any], info: SerializationInfo) -> dict[str, Any]:
    """``data`` without the keys whose value equals the given default (unless ``FULL_DUMP``).

    Fields added after decks were first written stay out of the canonical dump (and so out of the
    deck's content hash) while they hold their default, so an older deck keeps its hash.
    """
    if isinstance(info.context, dict) and info.context.get("celllab_full_dump"):
        return data
    return {k: v for k, v in data.items() if not (k in defaults and v == defaults[k])}


def _f(lo: float | None, hi: float | None, desc: str, *, gt: bool = False, default=...):  # type: ignore[no-untyped-def]
    kwargs: dict = {"description": desc}
    if lo is not None:
        kwargs["gt" if gt else "ge"] = lo
    if hi is not None:
        kwargs["le"] = hi
    return Field(default, **kwargs)


class ProcessInfo(StrictModel):
    name: str = Field(pattern=r"^[A-Za-z][A-Za-z0-9_\-]{0,39}$",
                      description="short process name: letters, digits, _ or -")
    description: str = Field("", description="free text")
    invented: bool = Field(False, description="true for demo data that describes no real process")
    node_nm: float = _f(3, 1000, "nominal node class, nm")


class DeviceParams(StrictModel):
    """One device polarity (N or P) on one oxide flavour."""

    vth_V: float = _f(-3.0, 3.0, "threshold voltage at the reference temperature, V (negative for PMOS)")
    vfb_V: float | None = _f(-3.0, 3.0, "flat-band voltage, V; omitted: from work-function difference",
                             default=None)
    mu0_cm2_per_Vs: float = _f(5, 1500, "low-field channel mobility, cm^2/(V s)")
    theta_per_V: float = _f(0, 5, "mobility degradation coefficient: mu = mu0/(1 + theta Vov), 1/V")
    mobility_temp_exponent: float = _f(-3, 0, "mu(T) = mu(Tref) (T/Tref)^exponent, unitless")
    vth_temp_coeff_V: float = _f(-1.0, 1.0, "threshold shift KT1: Vt(T) = Vt + KT1 (T/Tref - 1), V")


class LeakageParams(StrictModel):
    model: LeakageModel = Field("direct_tunnel", description="direct_tunnel: Schuegraf-King-Hu WKB "
                                "model; reference: scale a measured density")
    area_factor: float = _f(1e-6, 1e3, "empirical multiplier on the WKB density (calibration), unitless",
                            default=1.0)
    j_ref_A_per_cm2: float | None = _f(0, 1e5, "reference gate current density (electron tunnelling, "
                                       "an NMOS in inversion), A/cm^2", default=None)
    j_ref_t_ox_nm: float | None = _f(0.3, 20, "oxide thickness of the reference density, nm", default=None)
    j_ref_V: float | None = _f(0.05, 10, "gate voltage of the reference density, V", default=None)
    decades_per_nm: float = _f(0.5, 20, "decades of current per nm of oxide thinning", default=5.0)
    voltage_exponent: float = _f(0.5, 10, "J proportional to V^exponent near the reference", default=2.5)

    @model_validator(mode="after")
    def _reference_complete(self) -> "LeakageParams":
        if self.model == "reference":
            missing = [n for n in ("j_ref_A_per_cm2", "j_ref_t_ox_nm", "j_ref_V") if getattr(self, n) is None]
            if missing:
                raise ValueError("model 'reference' needs " + ", ".join(missing))
        return self


# --- gate tunnelling per carrier and its temperature law ([oxides.<flavour>.tunnelling]) -------

#: Fields of ``[oxides.<flavour>.leakage]`` that moved to ``[oxides.<flavour>.tunnelling]``.
MOVED_TUNNELLING_FIELDS: dict[str, str] = {"barrier_eV": "electron_barrier_eV", "mass_ratio": "electron_mass_ratio"}


class Tunnelling(StrictModel):
    """Gate tunnelling per carrier through one dielectric, and its temperature law.

    Electrons tunnel from the conduction band where the channel or accumulation layer holds
    electrons (NMOS in inversion, n-type accumulation); holes from the valence band where it holds
    holes (PMOS in inversion, p-type accumulation). Defaults: Lee & Hu, IEEE TED 48(7), 2001 (the
    BSIM4 constants): electrons 3.1 eV / 0.40 m0, holes 4.5 eV / 0.32 m0.
    """

    electron_barrier_eV: float = _f(0.5, 6.0, "barrier for electrons from the conduction band, eV", default=3.1)
    electron_mass_ratio: float = _f(0.05, 1.0, "oxide effective mass of tunnelling electrons / m0", default=0.40)
    hole_barrier_eV: float = _f(0.5, 6.0, "barrier for holes from the valence band, eV", default=4.5)
    hole_mass_ratio: float = _f(0.05, 1.0, "oxide effective mass of tunnelling holes / m0", default=0.32)
    temperature_exponent: float = _f(-5.0, 10.0, "gate current J(T) = J(T_ref) (T/T_ref)^exponent on top of "
                                     "the bias shift, unitless (2.5: BSIM-CMG IGT default)", default=2.5)
    hole_j_ref_A_per_cm2: float | None = _f(0, 1e5, "reference model only: hole gate current density at the "
                                            "leakage reference point (a PMOS in inversion), A/cm^2; omitted: "
                                            "the electron reference times the WKB hole/electron ratio",
                                            default=None)


class ReliabilityParams(StrictModel):
    weibull_beta: float = _f(0.3, 10, "Weibull slope of time to breakdown, unitless")
    eta_ref_s: float = _f(1.0, 1e20, "Weibull characteristic life (63 %) at the reference condition, s")
    area_ref_um2: float = _f(1e-3, 1e9, "gate area of the reference test structure, um^2")
    v_ref_V: float = _f(0.1, 50, "gate voltage of the reference stress, V")
    t_ref_C: float = _f(-55, 250, "temperature of the reference stress, degC")
    acceleration: AccelerationModel = Field("power_law", description="voltage-acceleration model")
    acceleration_exponent: float = _f(0, 200, "power-law n (t ~ V^-n), E-model gamma (cm/MV) or "
                                      "1/E-model G (MV/cm), per the chosen model")
    activation_energy_eV: float = _f(0, 2.0, "Arrhenius activation energy, eV")
    breakdown_spot_ohm: float = _f(1, 1e9, "resistance of a hard-breakdown spot through this oxide "
                                   "(gate to channel), ohm", default=2000.0)

    @model_serializer(mode="wrap")
    def _canonical(self, handler: SerializerFunctionWrapHandler, info: SerializationInfo) -> dict[str, Any]:
        return _without_defaults(dict(handler(self)), {"breakdown_spot_ohm": 2000.0}, info)


class OxideFlavour(StrictModel):
    """One gate-dielectric flavour (core thin oxide or I/O thick oxide)."""

    t_ox_nm: float | None = _f(0.3, 30, "physical dielectric thickness, nm", default=None)
    eot_nm: float | None = _f(0.3, 30, "equivalent SiO2 thickness, nm (use instead of t_ox_nm and "
                              "eps_r for high-k stacks)", default=None)
    eps_r: float = _f(1.0, 100, "relative permittivity of the dielectric, unitless", default=3.9)
    gate: GateMaterial = Field("n_poly", description="gate electrode: n_poly, p_poly (NMOS/PMOS get "
                               "their own doped poly) or metal")
    gate_doping_cm3: float | None = _f(1e18, 1e22, "active doping of a poly gate, cm^-3", default=None)
    nmos_gate_workfunction_eV: float | None = _f(3.5, 5.8, "metal gate work function over NMOS, eV", default=None)
    pmos_gate_workfunction_eV: float | None = _f(3.5, 5.8, "metal gate work function over PMOS, eV", default=None)
    centroid_model: bool = Field(True, description="apply the BSIM4-style charge-centroid correction")
    cet_adder_nm: float | None = _f(0, 3, "fixed extra electrical thickness instead of the centroid "
                                    "model, nm", default=None)
    overlap_cap_fF_per_um: float = _f(0, 2, "gate-to-diffusion overlap plus fringe capacitance per "
                                      "um of gate width per side, fF/um")
    min_gate_length_um: float = _f(0.01, 10, "minimum drawn gate length, um")
    min_gate_width_um: float | None = _f(0.01, 10, "minimum drawn gate (diffusion) width per "
                                         "finger and row, um; omitted: min_gate_length_um",
                                         default=None)
    breakdown_field_dc_MV_per_cm: float = _f(1, 40, "DC ramp breakdown field, MV/cm")
    breakdown_field_pulse_MV_per_cm: float = _f(1, 60, "short-pulse (~100 ns) breakdown field, MV/cm")
    nmos: DeviceParams
    pmos: DeviceParams
    leakage: LeakageParams = LeakageParams()
    tunnelling: Tunnelling = Tunnelling()
    reliability: ReliabilityParams

    @model_serializer(mode="wrap")
    def _canonical(self, handler: SerializerFunctionWrapHandler, info: SerializationInfo) -> dict[str, Any]:
        # left out of the dump (and the content hash) while omitted or at their defaults: the
        # minimum gate width, and the per-carrier tunnelling table at its published values
        return _without_defaults(dict(handler(self)), {"min_gate_width_um": None,
                                                        "tunnelling": Tunnelling().model_dump()}, info)

    @model_validator(mode="before")
    @classmethod
    def _moved_tunnelling_fields(cls, data: Any) -> Any:
        # leakage.barrier_eV / mass_ratio were the electron parameters before tunnelling was split
        # by carrier: still read (with a FutureWarning), written back under tunnelling
        if not isinstance(data, dict) or not isinstance(data.get("leakage"), dict):
            return data
        moved = {old: new for old, new in MOVED_TUNNELLING_FIELDS.items() if old in data["leakage"]}
        if not moved:
            return data
        data = {**data, "leakage": dict(data["leakage"])}
        tunnelling = dict(data.get("tunnelling") or {})
        for old, new in moved.items():
            value = data["leakage"].pop(old)
            if new in tunnelling and tunnelling[new] != value:
                raise ValueError(f"leakage.{old} ({value}) and tunnelling.{new} ({tunnelling[new]}) disagree; "
                                 f"give only tunnelling.{new}")
            tunnelling[new] = value
        data["tunnelling"] = tunnelling
        warnings.warn("deck: " + ", ".join(f"leakage.{o} is now tunnelling.{n}" for o, n in moved.items())
                      + " (read for now; rename it in the deck)", FutureWarning, stacklevel=2)
        return data

    @model_validator(mode="after")
    def _thickness(self) -> "OxideFlavour":
        if (self.t_ox_nm is None) == (self.eot_nm is None):
            raise ValueError("give exactly one of t_ox_nm or eot_nm")
        if self.gate != "metal" and self.gate_doping_cm3 is None:
            raise ValueError("a poly gate needs gate_doping_cm3")
        if self.gate == "metal" and (self.nmos_gate_workfunction_eV is None
                                     or self.pmos_gate_workfunction_eV is None):
            if self.nmos.vfb_V is None or self.pmos.vfb_V is None:
                raise ValueError("a metal gate needs nmos_/pmos_gate_workfunction_eV or vfb_V for both devices")
        if self.breakdown_field_pulse_MV_per_cm < self.breakdown_field_dc_MV_per_cm:
            raise ValueError("breakdown_field_pulse_MV_per_cm must not be below breakdown_field_dc_MV_per_cm")
        return self

    @property
    def min_width_um(self) -> float:
        """Smallest gate width a cell may draw on this oxide, um."""
        return self.min_gate_width_um if self.min_gate_width_um is not None else self.min_gate_length_um

    @property
    def eot_m(self) -> float:
        """Equivalent oxide thickness, m."""
        if self.eot_nm is not None:
            return to_si(self.eot_nm, "nm")
        assert self.t_ox_nm is not None
        return to_si(self.t_ox_nm, "nm") * EPS_R_SIO2 / self.eps_r

    @property
    def physical_thickness_m(self) -> float:
        """Physical thickness, m (EOT for an EOT-only oxide)."""
        thickness_nm = self.t_ox_nm if self.t_ox_nm is not None else self.eot_nm
        assert thickness_nm is not None  # the validator asks for one of the two
        return to_si(thickness_nm, "nm")


class Wells(StrictModel):
    substrate_doping_cm3: float = _f(1e13, 1e19, "p-substrate doping, cm^-3")
    pwell_doping_cm3: float = _f(1e14, 1e19, "p-well doping under NMOS channels, cm^-3")
    nwell_doping_cm3: float = _f(1e14, 1e19, "n-well doping under PMOS channels, cm^-3")
    nwell_sheet_ohm_per_sq: float = _f(10, 1e5, "n-well sheet resistance, ohm/sq")
    pwell_sheet_ohm_per_sq: float = _f(10, 1e5, "p-well sheet resistance, ohm/sq")


# --- well-junction leakage ([junctions.<kind>]) ------------------------------------------------

#: Reverse-biased well junctions a decap cell can hold, by the name used in ``[junctions]``.
JunctionKind = Literal["nwell", "deep_nwell"]


class JunctionLeakage(StrictModel):
    """Reverse saturation current of one well junction kind, BSIM4-style diode.

    I = (J_area A + J_perimeter P)(1 - exp(-V / (N kT/q))) at reverse bias V, with the densities
    scaled from the reference temperature by exp{[Eg(T_ref)/(kT_ref/q) - Eg(T)/(kT/q)
    + XTI ln(T/T_ref)] / N} (BSIM4 JSS/JSWS and their temperature law).
    """

    area_fA_per_um2: float = _f(0, 1e6, "saturation current per junction area at the reference "
                                "temperature, fA/um^2")
    perimeter_fA_per_um: float = _f(0, 1e6, "saturation current per junction perimeter at the reference "
                                    "temperature, fA/um")
    xti: float = _f(0, 10, "temperature exponent of the saturation current (BSIM4 XTIS), unitless", default=3.0)
    emission_coefficient: float = _f(0.5, 5, "diode emission coefficient N (BSIM4 NJS), unitless", default=1.0)


class Junctions(StrictModel):
    """Well junctions reverse-biased by the supply in some decap cells; a kind left out is not modelled
    (its cells carry a flag and count no junction leakage)."""

    nwell: JunctionLeakage | None = Field(None, description="n-well to p-substrate (an n-well on VDD)")
    deep_nwell: JunctionLeakage | None = Field(None, description="deep n-well to p-substrate (isolated "
                                               "p-wells on VDD)")


class Resistances(StrictModel):
    gate_sheet_ohm_per_sq: float = _f(0.01, 1e4, "gate electrode sheet resistance (silicided poly or metal), ohm/sq")
    diffusion_sheet_ohm_per_sq: float = _f(0.01, 1e4, "source/drain diffusion sheet resistance, ohm/sq")
    contact_ohm: float = _f(0.01, 1e4, "resistance of one contact, ohm")
    contact_pitch_um: float = _f(0.02, 10, "pitch of contacts along a diffusion or gate strap, um")


class MetalLayer(StrictModel):
    name: str = Field(pattern=r"^[A-Za-z][A-Za-z0-9_]{0,15}$", description="layer name, e.g. M1")
    thickness_nm: float = _f(10, 10000, "metal thickness, nm")
    min_width_nm: float = _f(5, 20000, "minimum line width, nm")
    min_space_nm: float = _f(5, 20000, "minimum line spacing, nm")
    height_nm: float = _f(10, 50000, "height of the layer bottom above the substrate, nm")
    ild_eps_r: float = _f(1.0, 10, "relative permittivity of the dielectric around this layer")
    sheet_ohm_per_sq: float = _f(1e-4, 100, "sheet resistance, ohm/sq")
    via_below_ohm: float = _f(0, 1e3, "resistance of one via to the layer below, ohm")
    # --- process variation of the printed line (corners move it with set/scale) -----------------
    width_bias_nm: float = _f(-1000, 1000, "printed minus drawn line width; the space between lines "
                              "changes by the opposite amount (pitch kept), nm", default=0.0)

    @model_serializer(mode="wrap")
    def _canonical(self, handler: SerializerFunctionWrapHandler, info: SerializationInfo) -> dict[str, Any]:
        return _without_defaults(dict(handler(self)), {"width_bias_nm": 0.0}, info)


class Layout(StrictModel):
    site_width_um: float = _f(0.01, 10, "placement site width, um", gt=True)
    row_height_um: float = _f(0.05, 50, "placement row height, um", gt=True)
    rail_width_um: float = _f(0.01, 10, "width of each supply rail (half of it inside the cell), um", gt=True)
    rail_layer: str = Field("M1", description="metal layer of the supply rails")
    edge_margin_um: float = _f(0, 5, "diffusion-to-cell-edge margin on left and right, um")
    poly_endcap_um: float = _f(0, 5, "gate extension past diffusion at each end, um")
    diffusion_strip_um: float = _f(0.01, 5, "width of a contacted source/drain strip between gates, um")
    well_spacing_um: float = _f(0, 10, "N-to-P active spacing in cells holding both device types, um")
    rail_clearance_um: float = _f(0, 5, "clearance from rail edge to active, um")
    # --- row structure: the well halves of a core row and the well spacings charged to cells ----
    # (geometry rules in celllab/topologies/geometry.py; omitted values are never invented: a cell
    # that needs one is refused with a located message)
    nwell_height_um: float | None = _f(0, 50, "core rows: height of the n-well half, from the power-rail "
                                       "edge of the row to the well boundary (the p-well half is the "
                                       "rest), um; omitted: half the row", gt=True, default=None)
    nwell_to_nwell_space_um: float | None = _f(0, 20, "spacing between n-wells on different rails (the "
                                               "ground-rail n-well of an n-well accumulation cell to a "
                                               "core row's power-rail n-well), um; needed by such cells "
                                               "in core rows", default=None)
    deep_nwell_space_um: float | None = _f(0, 20, "from the active of an isolated p-well (inside a deep "
                                           "n-well) to a cell edge a neighbour's p-well may reach: n-well "
                                           "ring plus deep-n-well spacing, um; needed by p-well "
                                           "accumulation cells", default=None)

    @model_serializer(mode="wrap")
    def _canonical(self, handler: SerializerFunctionWrapHandler, info: SerializationInfo) -> dict[str, Any]:
        return _without_defaults(dict(handler(self)), {
            "nwell_height_um": None, "nwell_to_nwell_space_um": None, "deep_nwell_space_um": None}, info)

    @property
    def nwell_half_um(self) -> float:
        """Height of a core row's n-well half, um (half the row when the deck gives none)."""
        return self.row_height_um / 2 if self.nwell_height_um is None else self.nwell_height_um

    @property
    def pwell_half_um(self) -> float:
        """Height of a core row's p-well half, um."""
        return self.row_height_um - self.nwell_half_um


# --- the frequency band the deck's cells are analysed over ([analysis]) -------------------------

class AnalysisBand(StrictModel):
    """The band a deck's cells are swept over: the band that matters for decoupling in this
    process (from below the package resonance to a few times its fastest clock harmonics).
    Self-resonance and cutoff above it are computed from each cell's equivalent circuit and
    marked as beyond the band, or stored as lower bounds where the circuit shows none."""

    f_min_MHz: float = _f(1e-3, 1e3, "lowest swept frequency (the low-frequency C and ESR are read "
                          "there), MHz", gt=True, default=0.1)
    f_max_GHz: float = _f(0.01, 1e4, "highest swept frequency: top of the band that matters, GHz",
                          gt=True, default=100.0)
    points_per_decade: float = _f(5, 200, "sweep points per decade (rounded to a whole number)", default=20.0)

    @model_validator(mode="after")
    def _ordered(self) -> "AnalysisBand":
        if to_si(self.f_max_GHz, "GHz") <= 10 * to_si(self.f_min_MHz, "MHz"):
            raise ValueError("f_max_GHz must lie more than a decade above f_min_MHz")
        return self


#: Supply net names: letters, digits and _ (safe in Liberty, LEF and SPICE without quoting).
_NET = r"^[A-Za-z][A-Za-z0-9_]{0,31}$"
#: Net-name fields and their defaults; see ``Supplies._canonical``.
NET_NAME_DEFAULTS: dict[str, str] = {
    "core_power_net": "VDD", "core_ground_net": "VSS", "io_power_net": "VDDIO", "io_ground_net": "VSSIO",
}


#: Names of the built-in rails; further rails are named in ``[supplies.named.<name>]``.
BUILT_IN_RAILS: tuple[str, ...] = ("core", "io")
_RAIL_NAME = re.compile(r"^[a-z][a-z0-9_]{0,23}$")


class NamedSupply(StrictModel):
    """A supply rail beyond core and io that cells may decouple (``[supplies.named.<name>]``)."""

    voltage_V: float = _f(0.3, 12, "rail voltage, V", gt=True)
    power_net: str = Field(pattern=_NET, description="net name of the rail (Liberty pg_pin, LEF pin)")
    ground_net: str = Field("VSS", pattern=_NET, description="net name of the rail's ground")


class Supplies(StrictModel):
    core_V: float = _f(0.3, 5, "core supply, V", gt=True)
    io_V: float = _f(0.5, 12, "I/O supply, V", gt=True)
    core_power_net: str = Field(NET_NAME_DEFAULTS["core_power_net"], pattern=_NET,
                                description="net name of the core supply rail (Liberty pg_pin, LEF pin)")
    core_ground_net: str = Field(NET_NAME_DEFAULTS["core_ground_net"], pattern=_NET,
                                 description="net name of the ground rail of core-oxide cells")
    io_power_net: str = Field(NET_NAME_DEFAULTS["io_power_net"], pattern=_NET,
                              description="net name of the I/O supply rail (cells on the io oxide)")
    io_ground_net: str = Field(NET_NAME_DEFAULTS["io_ground_net"], pattern=_NET,
                               description="net name of the ground rail of io-oxide cells")
    named: dict[str, NamedSupply] = Field(default_factory=dict, max_length=MAX_NAMED_RAILS, description="further rails by name "
                                          "(lower-case letters, digits, _), which cells may name as their rail")

    @model_serializer(mode="wrap")
    def _canonical(self, handler: SerializerFunctionWrapHandler, info: SerializationInfo) -> dict[str, Any]:
        # Net names do not change any computed number: left out of the dump (and so of the deck's
        # content hash) while at their defaults, so decks written before they existed keep their hash.
        return _without_defaults(dict(handler(self)), {**NET_NAME_DEFAULTS, "named": {}}, info)

    def rail_names(self) -> tuple[str, ...]:
        """Every rail a cell may name: core, io, then the named rails in file order."""
        return (*BUILT_IN_RAILS, *self.named)

    def rail_nets(self, rail: str) -> tuple[str, str]:
        """(power, ground) net names of ``rail`` ("core", "io" or a named rail); KeyError if unknown."""
        if rail == "io":
            return self.io_power_net, self.io_ground_net
        if rail == "core":
            return self.core_power_net, self.core_ground_net
        named = self.named[rail]
        return named.power_net, named.ground_net

    def voltage(self, rail: str) -> float:
        """Nominal voltage of ``rail``, V; KeyError if the deck has no such rail."""
        if rail == "io":
            return self.io_V
        if rail == "core":
            return self.core_V
        return self.named[rail].voltage_V


class RailDomain(StrictModel):
    """Protection and supply of one rail domain (the core or I/O VDD-VSS pair)."""

    clamp_on_V: float | None = _f(0.2, 50, "turn-on voltage of the domain's VDD-VSS ESD clamp, V; "
                                  "omitted: 1.5 x the domain's nominal supply", default=None)
    clamp_on_ohm: float = _f(0.01, 1000, "on-resistance of the clamp once triggered, ohm",
                             default=1.0, gt=True)
    clamp_response_ns: float = _f(0, 100, "time constant of the clamp's trigger (0: instantaneous), "
                                  "ns", default=0.5)
    clamp_diode_V: float = _f(0.1, 5, "turn-on of the clamp's reverse (VSS-to-VDD) diode, V",
                              default=0.7)
    clamp_diode_ohm: float | None = _f(0.01, 1000, "on-resistance of the clamp's reverse diode, ohm; "
                                       "omitted: clamp_on_ohm", default=None, gt=True)
    rail_capacitance_pF: float = _f(0, 1e6, "capacitance between the domain's rails besides the "
                                    "decap fill (wells, junctions, wiring, circuits), pF", default=100.0)
    supply_source_ohm: float = _f(0, 1e3, "resistance from the supply through package and grid to a "
                                  "cell, ohm", default=0.2)
    fault_current_limit_mA: float = _f(0, 1e6, "largest extra DC current one broken oxide may draw "
                                       "(supply current limit, standby budget or local rail "
                                       "electromigration limit, the tightest), mA", default=10.0, gt=True)


class Mission(StrictModel):
    """The life the gate oxides of a fill must survive."""

    life_years: float = _f(0, 100, "operating life, years", default=10.0, gt=True)
    temperature_C: float = _f(-55, 200, "junction temperature over the life, degC", default=105.0)
    supply_scale: float | None = _f(0.5, 1.5, "supply over the life as a multiple of nominal; "
                                    "omitted: the largest corner supply_scale", default=None)
    target_ppm: float = _f(0, 1e6, "cumulative oxide failure fraction allowed over the life, ppm "
                           "(sets the affordable gate area)", default=10.0, gt=True)


class EsdTargets(StrictModel):
    """The rail events every cell is characterized under (unpowered part, positive zap)."""

    hbm_V: float = _f(0, 30000, "human-body-model precharge (JS-001 network: 100 pF, 1.5 kohm), V",
                      default=2000.0, gt=True)
    cdm_V: float = _f(0, 5000, "charged-device-model charge voltage (the package-capacitance "
                      "stand-in of physics/esd.py), V", default=250.0, gt=True)


class ResistanceTempco(StrictModel):
    """First-order temperature coefficients of the deck's resistances, one per kind.

    R(T) = R(T0) (1 + alpha (T - T0)) at each corner's temperature T, with the resistances
    given at T0 (``reference_temperature_C``). Channel resistance is not listed: it follows the
    mobility's own temperature law.
    """

    reference_temperature_C: float | None = _f(-55, 200, "temperature at which the deck gives its "
                                               "resistances, degC; omitted: the deck's "
                                               "reference_temperature_C", default=None)
    gate_sheet_ppm_per_K: float = _f(-5000, 10000, "resistances.gate_sheet_ohm_per_sq, ppm/K", default=0.0)
    diffusion_sheet_ppm_per_K: float = _f(-5000, 10000, "resistances.diffusion_sheet_ohm_per_sq, ppm/K",
                                          default=0.0)
    contact_ppm_per_K: float = _f(-5000, 10000, "resistances.contact_ohm, ppm/K", default=0.0)
    metal_sheet_ppm_per_K: float = _f(-5000, 10000, "sheet_ohm_per_sq of every [[metals]] layer, ppm/K",
                                      default=0.0)
    via_ppm_per_K: float = _f(-5000, 10000, "via_below_ohm of every [[metals]] layer, ppm/K", default=0.0)
    well_sheet_ppm_per_K: float = _f(-5000, 20000, "wells.nwell_sheet_ohm_per_sq and "
                                     "wells.pwell_sheet_ohm_per_sq, ppm/K", default=0.0)

    def paths(self, deck: "Deck") -> dict[str, float]:
        """Dotted deck path of every resistance -> its coefficient, 1/K (non-zero ones only)."""
        per_kind = {
            "resistances.gate_sheet_ohm_per_sq": self.gate_sheet_ppm_per_K,
            "resistances.diffusion_sheet_ohm_per_sq": self.diffusion_sheet_ppm_per_K,
            "resistances.contact_ohm": self.contact_ppm_per_K,
            "wells.nwell_sheet_ohm_per_sq": self.well_sheet_ppm_per_K,
            "wells.pwell_sheet_ohm_per_sq": self.well_sheet_ppm_per_K,
        }
        for i in range(len(deck.metals)):
            per_kind[f"metals[{i}].sheet_ohm_per_sq"] = self.metal_sheet_ppm_per_K
            per_kind[f"metals[{i}].via_below_ohm"] = self.via_ppm_per_K
        return {path: to_si(ppm, "ppm/K") for path, ppm in per_kind.items() if ppm != 0.0}


class Corner(StrictModel):
    temperature_C: float = _f(-55, 200, "junction temperature, degC")
    supply_scale: float = _f(0.5, 1.5, "supply multiplier at this corner (e.g. 1.1 = +10 %)", default=1.0)
    set: dict[str, float] = Field(default_factory=dict, description="dotted deck paths set to new values")
    scale: dict[str, float] = Field(default_factory=dict, description="dotted deck paths multiplied by a factor")


class Deck(StrictModel):
    """A process deck: everything celllab needs to know about one process."""

    process: ProcessInfo
    reference_temperature_C: float = _f(-55, 200, "temperature at which device parameters are given, degC",
                                        default=25.0)
    oxides: dict[OxideName, OxideFlavour]
    wells: Wells
    junctions: Junctions = Junctions()
    resistances: Resistances
    metals: list[MetalLayer] = Field(min_length=1, max_length=MAX_METALS)
    layout: Layout
    supplies: Supplies
    analysis: AnalysisBand = AnalysisBand()
    corners: dict[str, Corner] = Field(min_length=1, max_length=MAX_CORNERS)
    rails: dict[str, RailDomain] = Field(default_factory=dict, description="ESD clamp and supply of "
                                         "each rail (core, io or a named rail); a rail not listed takes "
                                         "the defaults")
    mission: Mission = Field(default_factory=Mission, description="oxide life profile")
    esd: EsdTargets = Field(default_factory=EsdTargets, description="rail events of the catalog's "
                            "ESD columns")
    resistance_tempco: ResistanceTempco = ResistanceTempco()

    @model_serializer(mode="wrap")
    def _canonical(self, handler: SerializerFunctionWrapHandler, info: SerializationInfo) -> dict[str, Any]:
        # left out of the dump (and the content hash) while at their defaults: no temperature
        # coefficients, no well junctions modelled, the default analysis band, rail clamps,
        # mission and ESD events
        return _without_defaults(dict(handler(self)), {
            "resistance_tempco": ResistanceTempco().model_dump(), "junctions": Junctions().model_dump(),
            "analysis": AnalysisBand().model_dump(), "rails": {}, "mission": Mission().model_dump(),
            "esd": EsdTargets().model_dump()}, info)

    def full_dump(self) -> dict[str, Any]:
        """Every field as JSON data, defaults included (the paths corners and what-ifs may name)."""
        return self.model_dump(mode="json", context=FULL_DUMP)

    @property
    def resistance_reference_C(self) -> float:
        """Temperature at which the deck's resistances are given, degC."""
        t0 = self.resistance_tempco.reference_temperature_C
        return self.reference_temperature_C if t0 is None else t0

    @model_validator(mode="after")
    def _core_required(self) -> "Deck":
        if "core" not in self.oxides:
            raise ValueError("oxides: a 'core' oxide flavour is required")
        return self

    def rule_problems(self) -> list[tuple[str, object, str]]:
        """Cross-field rules, one (dotted field, value, message) per broken rule."""
        problems: list[tuple[str, object, str]] = []
        names = [m.name for m in self.metals]
        first: dict[str, int] = {}
        for i, name in enumerate(names):
            if first.setdefault(name, i) != i:
                problems.append((f"metals[{i}].name", name, "layer names must be unique"))
        for i in range(1, len(self.metals)):
            lower, upper = self.metals[i - 1], self.metals[i]
            if upper.height_nm <= lower.height_nm:
                problems.append((f"metals[{i}].height_nm", upper.height_nm,
                                 f"layers are listed bottom to top: must be above {lower.name} at {lower.height_nm:g} nm"))
            elif upper.height_nm < lower.height_nm + lower.thickness_nm:
                problems.append((f"metals[{i}].height_nm", upper.height_nm,
                                 f"overlaps {lower.name} (top at {lower.height_nm + lower.thickness_nm:g} nm)"))
        if self.layout.rail_layer not in names:
            problems.append(("layout.rail_layer", self.layout.rail_layer,
                             "not a metal layer; allowed: " + ", ".join(names)))
        room = self.layout.rail_width_um + 2 * self.layout.rail_clearance_um
        if room >= self.layout.row_height_um:
            problems.append(("layout.row_height_um", self.layout.row_height_um,
                             f"rails plus clearances ({room:g} um) leave no room in the row"))
        if self.supplies.io_V < self.supplies.core_V:
            problems.append(("supplies.io_V", self.supplies.io_V,
                             f"must be at least core_V ({self.supplies.core_V:g} V)"))
        s = self.supplies
        grounds = {s.core_ground_net, s.io_ground_net}
        for key in ("core_power_net", "io_power_net"):
            if getattr(s, key) in grounds:
                problems.append((f"supplies.{key}", getattr(s, key),
                                 "a supply net cannot also be a ground net; ground nets: " + ", ".join(sorted(grounds))))
        if s.core_power_net == s.io_power_net and s.core_V != s.io_V:
            problems.append(("supplies.io_power_net", s.io_power_net,
                             f"same net as core_power_net but io_V ({s.io_V:g} V) differs from core_V ({s.core_V:g} V)"))
        for domain in self.rails:
            if domain not in self.supplies.rail_names():
                problems.append((f"rails.{domain}", domain, "not a rail of this deck; allowed: "
                                 + ", ".join(self.supplies.rail_names())))
                continue
            # corner decks carry their scaled supply, so every corner is checked at its own
            v_supply = self.supply_for(domain)
            if self.clamp_on_V(domain) <= v_supply:
                problems.append((f"rails.{domain}.clamp_on_V", self.clamp_on_V(domain),
                                 f"must exceed the domain's supply ({v_supply:g} V), or the clamp "
                                 "conducts in operation"))
        for corner_name in self.corners:
            if not CORNER_NAME.fullmatch(corner_name):
                problems.append((f"corners.{corner_name}", corner_name,
                                 "corner names use letters, digits, _ and - (1 to 40 of them)"))
            elif corner_name.lower() in RESERVED_CORNER_NAMES:
                problems.append((f"corners.{corner_name}", corner_name,
                                 "a reserved word (the aggregate over all corners); choose another "
                                 "name; reserved: " + ", ".join(RESERVED_CORNER_NAMES)))
        problems += self._row_structure_problems()
        problems += self._named_supply_problems()
        problems += self._tempco_problems()
        return problems

    # --- rules of the row structure, named rails and resistance temperature coefficients -------
    def _row_structure_problems(self) -> list[tuple[str, object, str]]:
        problems: list[tuple[str, object, str]] = []
        lay = self.layout
        if lay.nwell_height_um is not None and lay.nwell_height_um >= lay.row_height_um:
            problems.append(("layout.nwell_height_um", lay.nwell_height_um,
                             f"must be less than row_height_um ({lay.row_height_um:g} um): the p-well "
                             "half needs room"))
        for i, m in enumerate(self.metals):
            if m.min_width_nm + m.width_bias_nm <= 0:
                problems.append((f"metals[{i}].width_bias_nm", m.width_bias_nm,
                                 f"leaves no line: must be > -{m.min_width_nm:g} nm (min_width_nm)"))
            if m.min_space_nm - m.width_bias_nm <= 0:
                problems.append((f"metals[{i}].width_bias_nm", m.width_bias_nm,
                                 f"closes the space: must be < {m.min_space_nm:g} nm (min_space_nm)"))
        return problems

    def _named_supply_problems(self) -> list[tuple[str, object, str]]:
        problems: list[tuple[str, object, str]] = []
        s = self.supplies
        powers = {s.core_power_net, s.io_power_net}
        grounds = {s.core_ground_net, s.io_ground_net} | {r.ground_net for r in s.named.values()}
        for name, rail in s.named.items():
            where = f"supplies.named.{name}"
            if name in BUILT_IN_RAILS or not _RAIL_NAME.match(name):
                problems.append((where, name, "rail names use lower-case letters, digits and _ (start "
                                 "with a letter, at most 24) and may not be " + " or ".join(BUILT_IN_RAILS)))
            if rail.power_net in grounds:
                problems.append((f"{where}.power_net", rail.power_net, "a supply net cannot also be a ground net"))
            if rail.ground_net in powers:
                problems.append((f"{where}.ground_net", rail.ground_net, "a ground net cannot also be a supply net"))
        return problems

    def _tempco_problems(self) -> list[tuple[str, object, str]]:
        problems: list[tuple[str, object, str]] = []
        tc = self.resistance_tempco
        for field_name in ResistanceTempco.model_fields:
            if not field_name.endswith("_ppm_per_K"):
                continue
            alpha = to_si(getattr(tc, field_name), "ppm/K")
            for corner_name, corner in self.corners.items():
                factor = 1.0 + alpha * (corner.temperature_C - self.resistance_reference_C)
                if factor <= 0:
                    problems.append((f"resistance_tempco.{field_name}", getattr(tc, field_name),
                                     f"resistance would not be positive at corner {corner_name} "
                                     f"({corner.temperature_C:g} degC): 1 + alpha (T - T0) = {factor:.3g}"))
        return problems

    @property
    def name(self) -> str:
        return self.process.name

    def corner_names(self) -> list[str]:
        return list(self.corners)

    def metal(self, name: str) -> MetalLayer:
        for m in self.metals:
            if m.name == name:
                return m
        raise KeyError(name)

    def supply_for(self, rail: str) -> float:
        """Nominal voltage of a rail ("core", "io" or a named rail), V; KeyError if unknown."""
        return self.supplies.voltage(rail)

    def rail(self, domain: str) -> RailDomain:
        """Clamp and supply parameters of a rail domain ("core" or "io"), defaults if not given."""
        return self.rails.get(domain, RailDomain())  # type: ignore[call-overload]

    def clamp_on_V(self, domain: str) -> float:
        """Clamp turn-on voltage of a domain, V (1.5 x its nominal supply unless given)."""
        given = self.rail(domain).clamp_on_V
        return given if given is not None else 1.5 * self.supply_for(domain)

    def mission_supply_scale(self) -> float:
        """Supply multiplier over the mission (the largest corner's unless given)."""
        if self.mission.supply_scale is not None:
            return self.mission.supply_scale
        return max(c.supply_scale for c in self.corners.values())

    # --- conveniences implemented in celllab.deck.load ----------------------------------
    @property
    def content_hash(self) -> str:
        """Short SHA-256 of the canonical JSON of every parameter (provenance key)."""
        from celllab.deck.load import content_hash

        return content_hash(self)

    def with_changes(self, changes: dict[str, object], source: str = "<what-if>") -> "Deck":
        """A validated copy with dotted paths set to new values; DeckError on bad input."""
        from celllab.deck.load import apply_changes

        return apply_changes(self, changes, source)

    def at_corner(self, corner: str) -> "Deck":
        """The deck with one corner's changes applied (temperature handled by the engine)."""
        from celllab.deck.load import corner_deck

        return corner_deck(self, corner)

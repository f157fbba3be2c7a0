"""Equivalent circuits of each decap topology as `Netlist` objects (SI: ohm, F, H).

Builders take plain per-variant arrays (broadcastable to (n_variant,)) and return a netlist with
ports ("vdd", "vss"). A series element whose value is zero in every variant is left out (its
nodes merged), so a rendered netlist carries no zero-ohm resistor; a zero in only some variants
stays in as a zero-valued R or L, which the solver treats as a short.
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from numpy.typing import ArrayLike

from celllab.physics.constants import FloatArray
from celllab.physics.netlist import Element, Netlist, parallel

ContactedEnds = Literal[1, 2]


def _values(value: ArrayLike) -> FloatArray:
    return np.asarray(value, dtype=float)


def _nonzero(value: ArrayLike) -> bool:
    return bool(np.any(np.asarray(value, dtype=float) != 0))


class _Chain:
    """Helper that appends series elements, skipping all-zero ones."""

    def __init__(self) -> None:
        self.elements: list[Element] = []

    def series(self, kind: Literal["R", "L"], name: str, a: str, b: str, value: ArrayLike) -> str:
        """Add ``a -[value]- b`` and return ``b``; if value is all zero return ``a`` instead."""
        if _nonzero(value):
            self.elements.append(Element(kind, name, a, b, _values(value)))
            return b
        return a

    def add(self, element: Element) -> None:
        self.elements.append(element)


def mos_decap_circuit(
    c_gate: ArrayLike,
    r_channel: ArrayLike,
    r_gate: ArrayLike = 0.0,
    r_access: ArrayLike = 0.0,
    l_loop: ArrayLike = 0.0,
    c_overlap: ArrayLike = 0.0,
    contacted_ends: ContactedEnds = 2,
    name: str = "mos_decap",
) -> Netlist:
    """MOS decap (inversion or accumulation): gate over a distributed channel.

    ::

        vdd ──L_loop── loop ──R_gate── gate ─────────────┐
                                        ║ RCLINE channel │ C_overlap
                                        ║ (R_channel,    │
                                        ║  C_gate)       │
        vss ──R_access───────────────── sd ──────────────┘

    Parameters
    ----------
    c_gate : array_like      intrinsic gate capacitance (oxide in series with the
                             semiconductor), F, > 0
    r_channel : array_like   total channel (inversion/accumulation layer) resistance from one
                             contacted edge to the other, ohm
    r_gate : array_like      effective distributed gate resistance (`gate_resistance`), ohm
    r_access : array_like    contacts, diffusion and vias to the rail, ohm
    l_loop : array_like      loop inductance of the cell's rail pair, H
    c_overlap : array_like   gate-to-source/drain overlap and fringe capacitance, F
    contacted_ends : {1, 2}  channel edges tied to the rail (2: source and drain)

    Returns
    -------
    Netlist   elements ``l_loop``, ``r_gate``, ``channel`` (RCLINE), ``c_overlap``,
              ``r_access``; low-frequency ESR = R_ch/3 or /12 + R_gate + R_access

    Notes
    -----
    Gate on the VDD side (NMOS style); a PMOS/n-well cell has the same two-port impedance.
    """
    chain = _Chain()
    node = chain.series("L", "l_loop", "vdd", "loop", l_loop)
    gate = chain.series("R", "r_gate", node, "gate", r_gate)
    sd = "sd" if _nonzero(r_access) else "vss"
    chain.add(
        Element(
            "RCLINE",
            "channel",
            sd,
            gate,
            _values(r_channel),
            _values(c_gate),
            contacted_ends=contacted_ends,
        )
    )
    if _nonzero(c_overlap):
        chain.add(Element("C", "c_overlap", gate, sd, _values(c_overlap)))
    if sd != "vss":
        chain.add(Element("R", "r_access", sd, "vss", _values(r_access)))
    return Netlist(name, tuple(chain.elements))


def cross_coupled_circuit(
    c_n: ArrayLike,
    c_p: ArrayLike,
    r_on_n: ArrayLike,
    r_on_p: ArrayLike,
    r_gate_n: ArrayLike = 0.0,
    r_gate_p: ArrayLike = 0.0,
    l_loop: ArrayLike = 0.0,
    c_overlap_n: ArrayLike = 0.0,
    c_overlap_p: ArrayLike = 0.0,
    name: str = "cross_coupled",
) -> Netlist:
    """Cross-coupled pair with each channel as a through RC line (source to drain).

    ::

        vdd ──L_loop── top ═══ mp_channel (R_on,p, C_p) ═══ y      plate: gp
                                                            │
                                              gn ──R_gate,n─┘
        vss ─────────────── ═══ mn_channel (R_on,n, C_n) ═══ x      plate: gn
                                                            │
                                              gp ──R_gate,p─┘

    The PMOS channel runs from its source (top) to its drain y and couples through C_p to its
    gate plate gp, fed from x through R_gate,p; the NMOS channel runs from VSS to its drain x and
    couples through C_n to its gate plate gn, fed from y. Overlap capacitances are split
    half to source, half to drain. Low-frequency ESR: `cross_coupled.pair_esr_low_frequency_distributed`.

    Parameters
    ----------
    c_n, c_p : array_like          gate capacitances, F, > 0
    r_on_n, r_on_p : array_like    channel resistances at the operating point, ohm, > 0
    r_gate_n, r_gate_p : array_like  distributed gate resistances, ohm
    l_loop : array_like            loop inductance, H
    c_overlap_n, c_overlap_p : array_like  total gate overlap capacitance of each device, F
    """
    chain = _Chain()
    top = chain.series("L", "l_loop", "vdd", "top", l_loop)
    gn = chain.series("R", "r_gate_n", "y", "gn", r_gate_n)
    gp = chain.series("R", "r_gate_p", "x", "gp", r_gate_p)
    chain.add(Element("RCLINE", "mp_channel", top, gp, _values(r_on_p), _values(c_p), node_far="y"))
    chain.add(
        Element("RCLINE", "mn_channel", "vss", gn, _values(r_on_n), _values(c_n), node_far="x")
    )
    for label, value, plate, ends in (
        ("n", c_overlap_n, gn, ("vss", "x")),
        ("p", c_overlap_p, gp, (top, "y")),
    ):
        if _nonzero(value):
            half = 0.5 * np.asarray(value, dtype=float)
            chain.add(Element("C", f"c_overlap_{label}d", plate, ends[1], half))
            chain.add(Element("C", f"c_overlap_{label}s", plate, ends[0], half))
    return Netlist(name, tuple(chain.elements))


def mom_circuit(
    c_mom: ArrayLike,
    r_fingers: ArrayLike,
    r_vias: ArrayLike = 0.0,
    l_loop: ArrayLike = 0.0,
    name: str = "mom",
) -> Netlist:
    """MOM capacitor: finger combs as a one-end-fed RC line behind the via resistance.

    ::

        vdd ──L_loop── in ─┬─R_vias[0]── m0 ═══ fingers_0 (r_fingers[0], c_mom[0]) ═══ vss
                           └─R_vias[1]── m1 ═══ fingers_1 ...                  (one per layer)

    Parameters
    ----------
    c_mom : array_like       capacitance, F: (n_variant,) for one branch, or
                             (n_layer, n_variant) for one branch per layer
    r_fingers : array_like   equivalent line R (low-frequency ESR = R/3;
                             `MomResult.finger_resistance` or `layer_line_resistance`), ohm
    r_vias : array_like      lumped via resistance per branch, ohm
    l_loop : array_like      loop inductance, H
    """
    c = np.atleast_1d(np.asarray(c_mom, dtype=float))
    c2 = c if c.ndim == 2 else c[None, :]
    r2 = np.broadcast_to(np.asarray(r_fingers, dtype=float), c2.shape)
    v2 = np.broadcast_to(np.asarray(r_vias, dtype=float), c2.shape)
    chain = _Chain()
    top = chain.series("L", "l_loop", "vdd", "in", l_loop)
    for i in range(c2.shape[0]):
        node = chain.series("R", f"r_vias_{i}", top, f"m{i}", v2[i])
        if _nonzero(r2[i]):
            chain.add(Element("RCLINE", f"fingers_{i}", node, "vss", r2[i], c2[i]))
        else:
            chain.add(Element("C", f"fingers_{i}", node, "vss", c2[i]))
    return Netlist(name, tuple(chain.elements))


def mos_mom_stack_circuit(
    c_gate: ArrayLike,
    r_channel: ArrayLike,
    c_mom: ArrayLike,
    r_fingers: ArrayLike,
    r_gate: ArrayLike = 0.0,
    r_access: ArrayLike = 0.0,
    c_overlap: ArrayLike = 0.0,
    contacted_ends: ContactedEnds = 2,
    r_vias: ArrayLike = 0.0,
    l_loop: ArrayLike = 0.0,
    name: str = "mos_mom",
) -> Netlist:
    """MOS decap and MOM capacitor in one footprint, in parallel behind one loop inductance.

    ::

        vdd ──L_loop── mos_mom_in ─┬─ [mos_decap_circuit without L] ─┐
                                   └─ [mom_circuit without L] ───────┴─ vss

    Element and internal node names carry the prefixes ``mos_`` and ``mom_``.
    """
    mos = mos_decap_circuit(
        c_gate, r_channel, r_gate, r_access, 0.0, c_overlap, contacted_ends, name="mos"
    )
    mom = mom_circuit(c_mom, r_fingers, r_vias, 0.0, name="mom")
    series = (
        (Element("L", "l_loop", "vdd", f"{name}_in", _values(l_loop)),) if _nonzero(l_loop) else ()
    )
    return parallel(name, (mos, mom), series)


def tied_cmos_circuit(
    nmos: Netlist,
    pmos: Netlist,
    l_loop: ArrayLike = 0.0,
    name: str = "tied_cmos",
) -> Netlist:
    """Tied NMOS and PMOS decaps side by side in one cell, in parallel behind one loop inductance.

    ::

        vdd ──L_loop── tied_cmos_in ─┬─ [NMOS mos_decap_circuit without L] ─┐
                                     └─ [PMOS mos_decap_circuit without L] ─┴─ vss

    Parameters
    ----------
    nmos, pmos : Netlist   each device's `mos_decap_circuit` built with ``l_loop = 0`` and named
                           ``nmos`` / ``pmos`` (element and node names get that prefix)
    l_loop : array_like    loop inductance of the cell's rail pair, H

    Notes
    -----
    Each device has the same two-port impedance whichever rail its gate is on (see
    `mos_decap_circuit`), so the cell is the two one-device circuits in parallel.
    """
    series = (
        (Element("L", "l_loop", "vdd", f"{name}_in", _values(l_loop)),) if _nonzero(l_loop) else ()
    )
    return parallel(name, (nmos, pmos), series)

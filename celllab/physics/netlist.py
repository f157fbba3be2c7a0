"""Small-signal equivalent circuits of decap cells and their port impedance (SI: ohm, F, H, Hz).

One data structure (`Netlist`: a name, two ports and a list of `Element`) describes every
topology's equivalent circuit; one solver (`solve_impedance`) evaluates Z(f) between the ports
for all variants and frequencies at once: by series-parallel reduction when the circuit is
series-parallel (`celllab.physics.series_parallel`), by complex modified nodal analysis (MNA)
otherwise.

Element kinds
-------------
``R``, ``C``, ``L``
    Two-terminal resistor (ohm, >= 0), capacitor (F, >= 0), inductor (H, >= 0) between
    ``node_a`` and ``node_b``. Zero R or L is a short (stamped as a branch equation, so a
    variant may have a zero value without making the matrix singular).
``RCLINE``
    Uniform distributed RC line (see `celllab.physics.distributed_rc`): total series
    resistance ``value`` (ohm) and total shunt capacitance ``c_total`` (F) to the plate node
    ``node_b``. The series path starts at ``node_a`` (the contacted end). Its far end is

    * open when ``node_far`` is None and ``contacted_ends`` = 1 (a channel fed from one side),
    * tied to ``node_a`` when ``node_far`` is None and ``contacted_ends`` = 2 (source and drain
      on the same rail),
    * connected to ``node_far`` otherwise (a through line, e.g. a channel whose source and drain
      sit on different nodes; ``contacted_ends`` is then ignored).

    It is stamped exactly (closed-form line admittances). `ladder_expansion` replaces it by an
    N-segment R-C ladder of plain ``R`` and ``C`` elements (for SPICE).

Values are numpy arrays of shape ``(n_variant,)`` or scalars (stored as Python floats).
``netlist.variant(i)`` gives one variant with every value a plain float, for rendering; element
names carry no SPICE kind letter, and builders use node names of letters, digits and ``_``.
The second port is the reference node; the first port receives a 1 A test current, so its
voltage is Z.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any, Literal, cast

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics.constants import FloatArray
from celllab.physics.distributed_rc import rc_line_even_odd_admittances, rc_line_impedance
from celllab.physics.series_parallel import ReductionPlan, reduced_impedance, reduction_plan

ComplexArray = NDArray[np.complex128]
ElementKind = Literal["R", "C", "L", "RCLINE"]
ELEMENT_KINDS: tuple[ElementKind, ...] = ("R", "C", "L", "RCLINE")

_BRANCH_OHM = 1e-3
"""Resistors below this (in any variant) get a branch current instead of a conductance stamp,
so zero and near-zero values stay well conditioned."""
_MAX_BLOCK_ENTRIES = 4_000_000
"""Complex matrix entries assembled at once (memory bound); the frequency axis is blocked."""


def _as_values(value: ArrayLike | float) -> FloatArray | float:
    if isinstance(value, float):
        return value
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        return float(arr)
    if arr.ndim > 1:
        raise ValueError(f"element value has shape {arr.shape} -> must be a scalar or (n_variant,)")
    return arr


@dataclass(frozen=True)
class Element:
    """One circuit element; see the module docstring for the kinds and their values.

    Attributes
    ----------
    kind : {"R", "C", "L", "RCLINE"}
    name : str            unique within the netlist (without a SPICE kind letter)
    node_a, node_b : str  terminals (RCLINE: contacted end, plate)
    value : array_like    R ohm / C F / L H; RCLINE: total series R, ohm
    c_total : array_like  RCLINE only: total shunt C, F
    contacted_ends : {1, 2}   RCLINE only, used when ``node_far`` is None
    node_far : str | None     RCLINE only: far-end node of a through line
    """

    kind: ElementKind
    name: str
    node_a: str
    node_b: str
    value: FloatArray | float
    c_total: FloatArray | float | None = None
    contacted_ends: Literal[1, 2] = 1
    node_far: str | None = None

    def __post_init__(self) -> None:
        if self.kind not in ELEMENT_KINDS:
            allowed = ", ".join(ELEMENT_KINDS)
            raise ValueError(f"element {self.name}: kind = {self.kind!r} -> allowed: {allowed}")
        if self.node_a == self.node_b:
            raise ValueError(f"element {self.name}: both terminals on node {self.node_a!r}")
        object.__setattr__(self, "value", _as_values(self.value))
        if np.any(~np.isfinite(self.value)) or np.any(np.asarray(self.value) < 0):
            raise ValueError(f"element {self.name}: value = {self.value!r} -> must be finite, >= 0")
        if self.kind == "RCLINE":
            if self.c_total is None:
                raise ValueError(f"element {self.name}: RCLINE needs c_total (F)")
            object.__setattr__(self, "c_total", _as_values(self.c_total))
            c = np.asarray(self.c_total)
            if np.any(~np.isfinite(c)) or np.any(c <= 0):
                raise ValueError(f"element {self.name}: c_total = {self.c_total!r} -> must be > 0")
            if self.contacted_ends not in (1, 2):
                raise ValueError(
                    f"element {self.name}: contacted_ends = {self.contacted_ends!r} -> 1 or 2"
                )
            if self.node_far is not None:
                if self.node_far in (self.node_a, self.node_b):
                    raise ValueError(f"element {self.name}: node_far must be a third node")
                if np.any(np.asarray(self.value) <= 0):
                    raise ValueError(f"element {self.name}: a through RCLINE needs value > 0")
        elif self.c_total is not None or self.node_far is not None:
            raise ValueError(f"element {self.name}: c_total/node_far are for RCLINE only")

    @property
    def nodes(self) -> tuple[str, ...]:
        """Terminal nodes (a, b[, far])."""
        if self.node_far is None:
            return (self.node_a, self.node_b)
        return (self.node_a, self.node_b, self.node_far)

    def _variant_sizes(self) -> list[int]:
        sizes = [np.size(self.value)]
        if self.c_total is not None:
            sizes.append(np.size(self.c_total))
        return sizes

    def variant(self, index: int) -> Element:
        """This element with plain float values for one variant.

        Built without ``__post_init__``: every variant's values were checked when this element
        was made, and one variant's plain floats pass the same checks
        (``tests/physics/test_netlist_variant.py`` holds it equal to the constructor's result).
        """
        new = object.__new__(Element)
        fields_ = new.__dict__
        fields_.update(self.__dict__)
        fields_["value"] = _pick(self.value, index)
        if self.c_total is not None:
            fields_["c_total"] = _pick(self.c_total, index)
        return new


def _pick(v: FloatArray | float, index: int) -> float:
    """One variant's value as a plain float (a scalar serves every variant)."""
    if type(v) is float:
        return v
    arr = np.asarray(v, dtype=float)
    return float(arr) if arr.ndim == 0 else float(arr[index])


@dataclass(frozen=True)
class Netlist:
    """A topology's small-signal equivalent circuit between two ports.

    Attributes
    ----------
    name : str
    elements : tuple[Element, ...]
    ports : (str, str)   (driven port, reference port), default ("vdd", "vss")
    """

    name: str
    elements: tuple[Element, ...]
    ports: tuple[str, str] = ("vdd", "vss")
    _n_variant: int = field(init=False, repr=False, compare=False, default=1)

    def __post_init__(self) -> None:
        object.__setattr__(self, "elements", tuple(self.elements))
        names = [el.name for el in self.elements]
        duplicates = sorted({n for n in names if names.count(n) > 1})
        if duplicates:
            raise ValueError(f"netlist {self.name}: duplicate element names {duplicates}")
        if self.ports[0] == self.ports[1]:
            raise ValueError(f"netlist {self.name}: ports must differ, got {self.ports}")
        nodes = {n for el in self.elements for n in el.nodes}
        missing = [p for p in self.ports if p not in nodes]
        if missing:
            raise ValueError(f"netlist {self.name}: port(s) {missing} not connected")
        sizes = {s for el in self.elements for s in el._variant_sizes() if s != 1}
        if len(sizes) > 1:
            raise ValueError(
                f"netlist {self.name}: element values have variant counts {sorted(sizes)} "
                "-> all must be 1 or the same n_variant"
            )
        object.__setattr__(self, "_n_variant", sizes.pop() if sizes else 1)

    @property
    def n_variant(self) -> int:
        """Number of variants the values broadcast to."""
        return self._n_variant

    def __iter__(self) -> Iterator[Element]:
        return iter(self.elements)

    def element(self, name: str) -> Element:
        """The element called ``name``."""
        for el in self.elements:
            if el.name == name:
                return el
        raise KeyError(f"netlist {self.name}: no element {name!r}")

    def node_names(self) -> tuple[str, ...]:
        """All nodes: the two ports first, then internal nodes in order of appearance."""
        seen: dict[str, None] = dict.fromkeys(self.ports)
        for el in self.elements:
            for n in el.nodes:
                seen.setdefault(n, None)
        return tuple(seen)

    def variant(self, index: int) -> Netlist:
        """The netlist of one variant: every element value a plain float (for rendering).

        Names, ports and nodes were checked when this netlist was made and one variant keeps
        them, so it is built without ``__post_init__`` (equal to the constructors' result:
        ``tests/physics/test_netlist_variant.py``).
        """
        if not -self.n_variant <= index < self.n_variant:
            raise IndexError(f"variant {index} out of range for {self.n_variant} variants")
        new = object.__new__(Netlist)
        new.__dict__.update(name=self.name, elements=tuple(el.variant(index) for el in self.elements),
                            ports=self.ports, _n_variant=1)
        return new

    def take(self, rows: ArrayLike) -> Netlist:
        """The netlist of the given variants, in that order (a value shared by all stays one)."""
        idx = np.asarray(rows, dtype=np.intp)

        def sub(v: Any) -> Any:
            return v if v is None or np.ndim(v) == 0 else np.asarray(v)[idx]

        return Netlist(self.name, tuple(replace(el, value=sub(el.value), c_total=sub(el.c_total))
                                        for el in self.elements), self.ports)

    def with_values(
        self, updates: Mapping[str, ArrayLike | tuple[ArrayLike, ArrayLike]]
    ) -> Netlist:
        """Replace element values by name; an RCLINE takes a (R, C) tuple."""
        new = []
        for el in self.elements:
            if el.name in updates:
                upd = updates[el.name]
                if el.kind == "RCLINE":
                    r, c = cast(tuple[ArrayLike, ArrayLike], upd)
                    el = replace(el, value=_as_values(r), c_total=_as_values(c))
                else:
                    el = replace(el, value=_as_values(cast(ArrayLike, upd)))
            new.append(el)
        self._check_names(updates)
        return Netlist(self.name, tuple(new), self.ports)

    def scaled(self, factors: Mapping[str, ArrayLike | tuple[ArrayLike, ArrayLike]]) -> Netlist:
        """Multiply element values by name; an RCLINE takes one factor (R only) or (fR, fC)."""
        self._check_names(factors)
        updates: dict[str, ArrayLike | tuple[ArrayLike, ArrayLike]] = {}
        for name, f in factors.items():
            el = self.element(name)
            if el.kind == "RCLINE":
                fr, fc = f if isinstance(f, tuple) else (f, 1.0)
                updates[name] = (
                    np.asarray(el.value) * np.asarray(fr, dtype=float),
                    np.asarray(el.c_total) * np.asarray(fc, dtype=float),
                )
            else:
                updates[name] = np.asarray(el.value) * np.asarray(f, dtype=float)
        return self.with_values(updates)

    def parallel_copies(self, count: ArrayLike) -> Netlist:
        """``count`` identical copies in parallel; see `scale_parallel`."""
        return scale_parallel(self, count)

    def _check_names(self, names: Mapping[str, object]) -> None:
        known = {el.name for el in self.elements}
        unknown = sorted(set(names) - known)
        if unknown:
            raise KeyError(f"netlist {self.name}: no element(s) {unknown}; known: {sorted(known)}")


def scale_parallel(netlist: Netlist, count: ArrayLike) -> Netlist:
    """``count`` identical copies of a netlist in parallel between its ports, as one netlist.

    Parameters
    ----------
    netlist : Netlist
    count : array_like   copies, > 0 and finite: a scalar or (n_variant,) (need not be an
                         integer: a mean count over variants is allowed)

    Returns
    -------
    Netlist   same elements and nodes: R and L divided by ``count``, C multiplied; an RCLINE
              gets R / count and C * count

    Notes
    -----
    Exact for copies driven only at the shared ports: by symmetry every copy's internal node
    k sits at the same voltage, so the copies' nodes k can be merged, and N equal elements in
    parallel are one element of admittance N Y (an RC line of N R-values in parallel is a line
    of R/N per length and N C per length, whose propagation constant sqrt(j w R C) is
    unchanged). Each element's admittance is therefore multiplied by N and Z_out = Z_cell / N
    at every frequency.
    """
    m = np.asarray(count, dtype=float)
    if m.ndim > 1 or np.any(~np.isfinite(m)) or np.any(m <= 0):
        raise ValueError(f"count = {count!r} -> must be finite and > 0 (scalar or (n_variant,))")
    new = []
    for el in netlist.elements:
        if el.kind == "C":
            new.append(replace(el, value=_as_values(np.asarray(el.value) * m)))
        elif el.kind == "RCLINE":
            new.append(
                replace(
                    el,
                    value=_as_values(np.asarray(el.value) / m),
                    c_total=_as_values(np.asarray(el.c_total) * m),
                )
            )
        else:
            new.append(replace(el, value=_as_values(np.asarray(el.value) / m)))
    return Netlist(netlist.name, tuple(new), netlist.ports)


def structure_key(netlist: Netlist) -> tuple[object, ...]:
    """What must match for netlists to be stacked as variants: ports, element kinds, names,
    nodes and line end conditions (not values)."""
    return (
        netlist.ports,
        tuple(
            (el.kind, el.name, el.node_a, el.node_b, el.node_far, el.contacted_ends)
            for el in netlist.elements
        ),
    )


def stack_variants(name: str, netlists: Sequence[Netlist]) -> Netlist:
    """Netlists of one structure stacked into one netlist whose variants are theirs in order.

    Parameters
    ----------
    name : str
    netlists : sequence of Netlist   same `structure_key`; each with any variant count

    Returns
    -------
    Netlist   n_variant = sum of the parts' variant counts; element values (n_variant,)

    Raises
    ------
    ValueError   when the structures differ (names the first netlist that differs)
    """
    if not netlists:
        raise ValueError("stack_variants needs at least one netlist")
    key = structure_key(netlists[0])
    for other in netlists[1:]:
        if structure_key(other) != key:
            raise ValueError(
                f"netlist {other.name} differs in structure from {netlists[0].name}: "
                "cannot stack them as variants"
            )
    counts = [nl.n_variant for nl in netlists]
    single = all(n == 1 for n in counts)

    def column(values: list[FloatArray | float | None]) -> FloatArray:
        if single:  # the common case (one circuit per cell and corner): no broadcasting
            return np.array([v if isinstance(v, float) else float(np.asarray(v).reshape(-1)[0])
                             for v in values], dtype=float)
        return np.concatenate(
            [np.broadcast_to(np.asarray(v, dtype=float), (n,)) for v, n in zip(values, counts)]
        )

    elements = []
    for k, el in enumerate(netlists[0].elements):
        value = column([nl.elements[k].value for nl in netlists])
        c_total = None if el.c_total is None else column([nl.elements[k].c_total for nl in netlists])
        elements.append(replace(el, value=value, c_total=c_total))
    return Netlist(name, tuple(elements), netlists[0].ports)


def parallel(name: str, parts: Sequence[Netlist], series: Sequence[Element] = ()) -> Netlist:
    """Join netlists in parallel between shared ports, optionally behind shared series elements.

    Parameters
    ----------
    name : str
    parts : sequence of Netlist   each with ports ("vdd", "vss")-like (driven, reference)
    series : sequence of Element  elements between the outer driven port and the parts' common
                                  driven node ``"{name}_in"`` (e.g. a shared loop inductance);
                                  they must use the nodes ``vdd`` and ``{name}_in``

    Returns
    -------
    Netlist   element and internal node names prefixed with ``{part.name}_``; ports
              ("vdd", "vss")
    """
    inner = f"{name}_in" if series else "vdd"
    elements: list[Element] = list(series)
    for part in parts:
        mapping = {part.ports[0]: inner, part.ports[1]: "vss"}

        def rename(
            node: str | None, part: Netlist = part, mapping: dict[str, str] = mapping
        ) -> str:
            assert node is not None
            return mapping.get(node, f"{part.name}_{node}")

        for el in part.elements:
            elements.append(
                replace(
                    el,
                    name=f"{part.name}_{el.name}",
                    node_a=rename(el.node_a),
                    node_b=rename(el.node_b),
                    node_far=None if el.node_far is None else rename(el.node_far),
                )
            )
    return Netlist(name, tuple(elements), ("vdd", "vss"))


def ladder_expansion(netlist: Netlist, n_segments: int) -> Netlist:
    """Replace every RCLINE by an ``n_segments`` R-C ladder of plain R and C elements.

    Parameters
    ----------
    netlist : Netlist
    n_segments : int   capacitor count per line, >= 1

    Returns
    -------
    Netlist   same ports; line ``x`` becomes resistors ``x_r0..`` , capacitors ``x_c1..`` and
              internal nodes ``x_1..x_N``

    Notes
    -----
    Midpoint discretization: the N capacitors C/N sit at the centres of N equal segments, so
    the series path is R/(2N), then (N-1) x R/N between capacitors, then R/(2N) to the far end
    (omitted when the far end is open). Low-frequency ESR of the open ladder is
    R (1/3 + 1/(6 N^2)): the error falls as 1/N^2. Valid up to omega R C / N^2 << 1.
    """
    if n_segments < 1:
        raise ValueError(f"n_segments = {n_segments} -> must be >= 1")
    n = n_segments
    out: list[Element] = []
    for el in netlist.elements:
        if el.kind != "RCLINE":
            out.append(el)
            continue
        r = np.asarray(el.value, dtype=float)
        c = np.asarray(el.c_total, dtype=float)
        inner = [f"{el.name}_{k}" for k in range(1, n + 1)]
        out.append(Element("R", f"{el.name}_r0", el.node_a, inner[0], _as_values(r / (2 * n))))
        for k in range(1, n):
            out.append(Element("R", f"{el.name}_r{k}", inner[k - 1], inner[k], _as_values(r / n)))
        for k in range(1, n + 1):
            out.append(Element("C", f"{el.name}_c{k}", inner[k - 1], el.node_b, _as_values(c / n)))
        far = (
            el.node_far
            if el.node_far is not None
            else (el.node_a if el.contacted_ends == 2 else None)
        )
        if far is not None:
            out.append(Element("R", f"{el.name}_r{n}", inner[-1], far, _as_values(r / (2 * n))))
    return Netlist(netlist.name, tuple(out), netlist.ports)


def _dc_components(netlist: Netlist) -> dict[str, str]:
    """Map each node to the root of its DC-connected component (through R, L, line paths)."""
    parent = {n: n for n in netlist.node_names()}

    def find(n: str) -> str:
        while parent[n] != n:
            parent[n] = parent[parent[n]]
            n = parent[n]
        return n

    def union(a: str, b: str) -> None:
        ra, rb = find(a), find(b)
        if ra != rb:
            parent[rb] = ra

    for el in netlist.elements:
        if el.kind in ("R", "L"):
            union(el.node_a, el.node_b)
        elif el.kind == "RCLINE" and el.node_far is not None:
            union(el.node_a, el.node_far)
    # the ports are the roots of their components (driven port first, so Z = its potential)
    for port in netlist.ports:
        root = find(port)
        if root != port:
            parent[root] = port
            parent[port] = port
    return {n: find(n) for n in parent}


@dataclass(frozen=True)
class _Layout:
    """Unknown ordering of one netlist's MNA system (see `solve_impedance`, Notes).

    Node voltages are the potential of their DC-connected component plus a local offset;
    offsets and branch currents come first, component potentials last.
    """

    root: dict[str, str]
    index_offset: dict[str, int]
    index_potential: dict[str, int]
    branch_ids: dict[int, int]
    n_off: int
    size: int

    def incidence(self, coeffs: Mapping[str, int]) -> dict[int, int]:
        """Node-space coefficients -> unknown-space coefficients (exact integer arithmetic)."""
        out: dict[int, int] = {}
        for node, c in coeffs.items():
            if node in self.index_offset:
                k = self.index_offset[node]
                out[k] = out.get(k, 0) + c
            r = self.root[node]
            if r in self.index_potential:
                k = self.index_potential[r]
                out[k] = out.get(k, 0) + c
        return {k: v for k, v in out.items() if v != 0}


def _layout(netlist: Netlist) -> _Layout:
    root = _dc_components(netlist)
    ground = netlist.ports[1]
    nodes = netlist.node_names()
    offsets = [n for n in nodes if root[n] != n]
    branch_elements = [
        el
        for el in netlist.elements
        if el.kind == "L" or (el.kind == "R" and np.any(np.asarray(el.value) < _BRANCH_OHM))
    ]
    potentials = [n for n in nodes if root[n] == n and root[n] != root[ground]]
    n_off, n_br = len(offsets), len(branch_elements)
    return _Layout(
        root=root,
        index_offset={n: k for k, n in enumerate(offsets)},
        index_potential={n: n_off + n_br + k for k, n in enumerate(potentials)},
        branch_ids={id(el): k for k, el in enumerate(branch_elements)},
        n_off=n_off,
        size=n_off + n_br + len(potentials),
    )


def _assemble(netlist: Netlist, layout: _Layout, omega: FloatArray) -> ComplexArray:
    """MNA matrix of every element at angular frequencies ``omega`` (n_var, n_freq) rad/s."""
    size = layout.size
    y_mat = np.zeros(omega.shape + (size, size), dtype=complex)
    for el in netlist.elements:
        val = np.asarray(el.value, dtype=float).reshape(-1, 1)
        pair = layout.incidence({el.node_a: 1, el.node_b: -1})
        if id(el) in layout.branch_ids:
            # V_a - V_b - Z_branch I = 0; I leaves node a and enters node b
            k = layout.n_off + layout.branch_ids[id(el)]
            for p, g in pair.items():
                y_mat[..., p, k] += g
                y_mat[..., k, p] += g
            y_mat[..., k, k] -= val * (1j * omega if el.kind == "L" else 1.0)
        elif el.kind == "R":
            _stamp(y_mat, pair, 1.0 / val)
        elif el.kind == "C":
            _stamp(y_mat, pair, 1j * omega * val)
        elif el.node_far is None:
            c = np.asarray(el.c_total, dtype=float).reshape(-1, 1)
            _stamp(y_mat, pair, 1.0 / rc_line_impedance(val, c, omega, el.contacted_ends))
        else:
            # 3-terminal line = odd mode between the ends + even mode ends-to-plate:
            # Y = (y_o/2) (e_a - e_f)(..)^T + (y_e/2) (e_a + e_f - 2 e_b)(..)^T
            c = np.asarray(el.c_total, dtype=float).reshape(-1, 1)
            y_even, y_odd = rc_line_even_odd_admittances(val, c, omega)
            _stamp(y_mat, layout.incidence({el.node_a: 1, el.node_far: -1}), 0.5 * y_odd)
            _stamp(
                y_mat,
                layout.incidence({el.node_a: 1, el.node_far: 1, el.node_b: -2}),
                0.5 * y_even,
            )
    return y_mat


def _frequencies(freq_Hz: ArrayLike) -> FloatArray:
    f = np.asarray(freq_Hz, dtype=float)
    if f.ndim == 1:
        f = f[None, :]
    if f.ndim != 2:
        raise ValueError(f"freq_Hz has shape {f.shape} -> must be (n_freq,) or (n_variant, n_freq)")
    if np.any(~(f > 0)):
        raise ValueError("freq_Hz must be > 0 everywhere")
    return f


def _variant_count(*rows: int) -> int:
    n_var = max(rows)
    if any(r not in (1, n_var) for r in rows):
        raise ValueError(f"variant counts {sorted(set(rows))} do not broadcast")
    return n_var


def solve_impedance(netlist: Netlist, freq_Hz: ArrayLike,
                    method: Literal["auto", "nodal"] = "auto") -> ComplexArray:
    """Impedance between the two ports of every variant at every frequency.

    Parameters
    ----------
    netlist : Netlist
    freq_Hz : array_like   frequencies, Hz, > 0: shape (n_freq,) shared by all variants, or
                           (n_variant, n_freq) per variant
    method : {"auto", "nodal"}   "auto": a series-parallel circuit is reduced element-wise
                           (`celllab.physics.series_parallel`), every other circuit and every
                           variant with a zero-valued element (or a non-finite reduced value)
                           is solved by nodal analysis; "nodal": nodal analysis throughout

    Returns
    -------
    ndarray   complex Z, ohm, shape (n_variant, n_freq)

    Notes
    -----
    Modified nodal analysis (C.-W. Ho, A. E. Ruehli, P. A. Brennan, IEEE TCAS 22(6):504, 1975)
    with one branch current per L (and per R below 1 mohm in some variant), batched as
    (n_variant, n_freq_block, n, n) and solved by numpy.linalg.solve with a 1 A current into
    the driven port. Node voltages are written as the potential of their DC-connected
    component (through R, L and line paths) plus a local offset, offsets and branch currents
    ordered first: elimination then leaves the capacitive coupling between components for
    last, so the real part of a mostly capacitive low-frequency Z (omega R C ~ 1e-9) keeps full
    relative precision. Every component other than the reference one must reach the network
    through some element at each frequency (a floating node makes the matrix singular).
    The series-parallel reduction gives the same impedance (it is exact too; the two differ at
    the rounding level, ``tests/physics/test_series_parallel.py``).
    """
    f = _frequencies(freq_Hz)
    try:
        n_var = _variant_count(netlist.n_variant, f.shape[0])
    except ValueError:
        raise ValueError(
            f"freq_Hz rows {f.shape[0]} and netlist variants {netlist.n_variant} do not broadcast"
        ) from None
    plan = _reduction_plan(netlist) if method == "auto" else None
    if plan is None:
        z = solve_transfer(netlist, f, [netlist.ports[0]])
        return np.asarray(np.broadcast_to(z[..., 0, 0], (n_var, f.shape[1])), dtype=complex)
    with np.errstate(all="ignore"):  # a non-finite value is solved again below
        reduced = reduced_impedance(netlist, plan, 2.0 * np.pi * f)
    out = np.array(np.broadcast_to(reduced, (n_var, f.shape[1])), dtype=complex)
    again = ~np.isfinite(out).all(axis=1)
    for el in netlist.elements:  # a zero value is a short or an open: not for reciprocals
        again |= np.broadcast_to(np.asarray(el.value) == 0, (n_var,))
        if el.c_total is not None:
            again |= np.broadcast_to(np.asarray(el.c_total) == 0, (n_var,))
    if again.any():
        rows = np.flatnonzero(again)
        sub = netlist.take(rows) if netlist.n_variant > 1 else netlist
        out[rows] = solve_transfer(sub, f[rows] if f.shape[0] > 1 else f, [netlist.ports[0]])[..., 0, 0]
    return out


_PLANS: dict[tuple[object, ...], ReductionPlan | None] = {}
_MAX_PLANS = 512


def _reduction_plan(netlist: Netlist) -> ReductionPlan | None:
    """`reduction_plan` of the netlist's structure, found once per structure."""
    key = structure_key(netlist)
    if key not in _PLANS:
        if len(_PLANS) >= _MAX_PLANS:
            _PLANS.clear()
        _PLANS[key] = reduction_plan(netlist)
    return _PLANS[key]


def solve_transfer(
    netlist: Netlist,
    freq_Hz: ArrayLike,
    drive_nodes: Sequence[str],
    observe_nodes: Sequence[str] | None = None,
    shunt_admittance: Mapping[str, ArrayLike] | None = None,
) -> ComplexArray:
    """Transfer impedances V(observe) / I(drive) between nodes, all variants and frequencies.

    Parameters
    ----------
    netlist : Netlist
    freq_Hz : array_like          Hz, > 0: (n_freq,) or (n_variant, n_freq)
    drive_nodes : sequence of str   nodes receiving, one at a time, a 1 A current from the
                                  reference node ``netlist.ports[1]``
    observe_nodes : sequence of str, optional   nodes whose voltage to the reference is read;
                                  default ``drive_nodes`` (then the result is the Z-matrix)
    shunt_admittance : mapping node -> array_like, optional
                                  extra admittance, S, from a node to the reference, of shape
                                  (n_freq,) or (n_variant, n_freq): a one-port sub-network
                                  already reduced to its admittance (exact: a two-terminal
                                  sub-network acts on the rest only through its admittance)

    Returns
    -------
    ndarray   complex ohm, shape (n_variant, n_freq, n_observe, n_drive);
              ``[..., i, j]`` = V(observe_i) / I(drive_j)

    Notes
    -----
    The same modified nodal analysis and unknown ordering as `solve_impedance` (which is the
    1 x 1 case at the driven port), with one right-hand side per driven node. The Z-matrix is
    symmetric (reciprocity of R, L, C and RC-line networks), which the tests check.
    """
    f = _frequencies(freq_Hz)
    drives = list(drive_nodes)
    observes = drives if observe_nodes is None else list(observe_nodes)
    known = set(netlist.node_names())
    shunts = {}
    for node, adm in (shunt_admittance or {}).items():
        a = np.asarray(adm, dtype=complex)
        a = a[None, :] if a.ndim == 1 else a
        if a.ndim != 2 or a.shape[1] != f.shape[1]:
            raise ValueError(
                f"shunt admittance at {node!r} has shape {np.shape(adm)} -> must be (n_freq,) "
                f"or (n_variant, n_freq) with n_freq = {f.shape[1]}"
            )
        shunts[node] = a
    unknown = sorted({*drives, *observes, *shunts} - known)
    if unknown:
        raise ValueError(f"netlist {netlist.name}: no node(s) {unknown}")
    if not drives:
        raise ValueError("drive_nodes is empty")
    n_var = _variant_count(netlist.n_variant, f.shape[0], *(a.shape[0] for a in shunts.values()))
    layout = _layout(netlist)
    ground = netlist.ports[1]
    drive_vectors = [layout.incidence({n: 1}) if n != ground else {} for n in drives]
    observe_vectors = [layout.incidence({n: 1}) if n != ground else {} for n in observes]
    shunt_vectors = [(layout.incidence({n: 1, ground: -1}), a) for n, a in shunts.items()]
    size, n_freq = layout.size, f.shape[1]
    out = np.zeros((n_var, n_freq, len(observes), len(drives)), dtype=complex)
    if size == 0:
        return out
    block = max(1, _MAX_BLOCK_ENTRIES // max(1, n_var * size * size))
    for start in range(0, n_freq, block):
        width = min(block, n_freq - start)
        omega = 2.0 * np.pi * np.broadcast_to(f[:, start : start + width], (n_var, width))
        y_mat = _assemble(netlist, layout, omega)
        for pair, adm in shunt_vectors:
            _stamp(y_mat, pair, np.broadcast_to(adm[:, start : start + width], (n_var, width)))
        rhs = np.zeros(omega.shape + (size, len(drives)), dtype=complex)
        for j, vec in enumerate(drive_vectors):
            for p, g in vec.items():
                rhs[..., p, j] = g
        sol = np.linalg.solve(y_mat, rhs)
        for i, vec in enumerate(observe_vectors):
            for p, g in vec.items():
                out[:, start : start + width, i, :] += g * sol[..., p, :]
    return out


def solve_z_matrix(
    netlist: Netlist,
    freq_Hz: ArrayLike,
    nodes: Sequence[str],
    shunt_admittance: Mapping[str, ArrayLike] | None = None,
) -> ComplexArray:
    """Z-matrix between ``nodes`` and the reference ``netlist.ports[1]``.

    Returns
    -------
    ndarray   complex ohm, (n_variant, n_freq, k, k): diagonal = impedance each node sees,
              off-diagonal = transfer impedance; see `solve_transfer`
    """
    return solve_transfer(netlist, freq_Hz, nodes, None, shunt_admittance)


def _stamp(y_mat: ComplexArray, coeffs: dict[int, int], adm: NDArray[np.inexact[Any]]) -> None:
    """Add adm * g g^T for the incidence vector g given as {index: coefficient}."""
    for p, gp in coeffs.items():
        for q, gq in coeffs.items():
            y_mat[..., p, q] += (gp * gq) * adm

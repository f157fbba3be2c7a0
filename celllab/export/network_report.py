"""A block's supply network in files: impedance tables, Touchstone Z-matrices, droop
waveforms and an HTML fragment with plots for a plan report.

Render functions are pure and return text; ``write_network_files`` stores them atomically.

=====================================  ===============================================
``render_z_csv(figures)``              every region pair's Z(f) at every corner (long form)
``render_region_z_csv(figures, r)``    the Z(f) region ``r`` sees, a column per corner
``render_z_touchstone(figures, c)``    the N-port Z-matrix of corner ``c``, Touchstone v1.1
``render_droop_csv(figures)``          droop waveforms of every corner and region
``render_network_html(figures)``       ``<section>`` with tables and inline SVG plots
=====================================  ===============================================
"""

from __future__ import annotations

import html
import io
import math
import os
import re
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import matplotlib
import numpy as np
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, NullLocator

from celllab import __version__
from celllab.export import CAUTION
from celllab.export.csv import format_value
from celllab.export.files import file_stem, write_files_atomic
from celllab.planner.network_figures import NetworkFigures, RegionFigures

__all__ = [
    "NETWORK_CAUTION",
    "render_droop_csv",
    "render_network_html",
    "render_region_z_csv",
    "render_z_csv",
    "render_z_touchstone",
    "write_network_files",
]

#: Shown with every network output.
NETWORK_CAUTION = (
    "Supply-network figures are estimates from lumped models of the package, the grid and "
    "each cell's equivalent circuit, not sign-off: defer to the foundry's and the package "
    "vendor's models, a full power-integrity analysis and licensed practice. " + CAUTION
)

_COLOURS = ("#0b5d7a", "#b3471d", "#2f7d32", "#6a3d9a", "#8c6d1f", "#4d4d4d")
_STYLES = ("-", "--", "-.", ":")
_TARGET_COLOUR = "#c2185b"


# ----------------------------------------------------------------------------- text files


def _header(figures: NetworkFigures, mark: str, what: str) -> list[str]:
    return [
        f"{mark} celllab {__version__}: {what}",
        f"{mark} regions: {', '.join(figures.region_names)}; corners: "
        f"{', '.join(figures.corners)}",
        f"{mark} worst-corner policy: {figures.policy}",
        f"{mark} CAUTION: {NETWORK_CAUTION}",
    ]


def render_z_csv(figures: NetworkFigures) -> str:
    """Z(f) of every (observed, driven) region pair at every corner, one row per point.

    Columns: observed_region, driven_region, corner, freq_Hz, z_real_ohm, z_imag_ohm,
    z_mag_ohm, target_ohm (the observed region's Z_target on the diagonal, empty off it).
    ``#`` header lines; ``\\r\\n`` line ends; round-trip numbers.
    """
    lines = _header(figures, "#", "supply-network impedance (Z-matrix) per corner")
    lines.append("observed_region,driven_region,corner,freq_Hz,z_real_ohm,z_imag_ohm,"
                 "z_mag_ohm,target_ohm")
    names = figures.region_names
    for i, obs in enumerate(names):
        for j, drv in enumerate(names):
            target = figures.regions[i].target if i == j else None
            target = target if target is not None and math.isfinite(target) else None
            for c, corner in enumerate(figures.corners):
                z = figures.z[c, :, i, j]
                for f, zk in zip(figures.freq.tolist(), z.tolist()):
                    values = (obs, drv, corner, f, zk.real, zk.imag, abs(zk), target)
                    lines.append(",".join(format_value(v) for v in values))
    return "\r\n".join(lines) + "\r\n"


def render_region_z_csv(figures: NetworkFigures, region: str) -> str:
    """The impedance one region sees at its node, Z_rr(f), at every corner: freq_Hz, then per
    corner ``z_real_ohm_<corner>``, ``z_imag_ohm_<corner>``, ``z_mag_ohm_<corner>``, then
    ``target_ohm`` (empty for a region without a target). ``#`` header lines naming the
    region's resonances (each at its worst corner); ``\r\n`` line ends; round-trip numbers.
    """
    if region not in figures.region_names:
        raise ValueError(f"region {region!r} not among {list(figures.region_names)}")
    k = figures.region_names.index(region)
    reg = figures.regions[k]
    lines = _header(figures, "#", f"impedance at the node of region {region} per corner")
    for t in reg.resonances:
        lines.append(f"# {t.kind} at {t.frequency:.6g} Hz: |Z| {t.magnitude:.6g} ohm, Q "
                     f"{t.q:.3g} ({t.corner})")
    target = reg.target if math.isfinite(reg.target) else None
    columns = ["freq_Hz"]
    for corner in figures.corners:
        columns += [f"z_real_ohm_{corner}", f"z_imag_ohm_{corner}", f"z_mag_ohm_{corner}"]
    lines.append(",".join(columns + ["target_ohm"]))
    z = figures.z[:, :, k, k]
    for i, f in enumerate(figures.freq.tolist()):
        values: list[object] = [f]
        for c in range(len(figures.corners)):
            zk = complex(z[c, i])
            values += [zk.real, zk.imag, abs(zk)]
        lines.append(",".join(format_value(v) for v in values + [target]))
    return "\r\n".join(lines) + "\r\n"


def _pairs_lines(values: Sequence[complex], per_line: int = 4) -> list[str]:
    chunks = [values[k:k + per_line] for k in range(0, len(values), per_line)]
    return [" ".join(f"{v.real:.11e} {v.imag:.11e}" for v in chunk) for chunk in chunks]


def render_z_touchstone(figures: NetworkFigures, corner: str, reference_ohm: float = 1.0
                        ) -> str:
    """The region Z-matrix at ``corner`` as a Touchstone v1.1 N-port file (``.sNp``).

    Port k is region k (listed in the header). Z data are normalized to R (Touchstone File
    Format Specification v1.1, IBIS Open Forum 2002): with R = 1 ohm the numbers are ohm.
    Two-port data are written in the specification's order Z11 Z21 Z12 Z22; three or more
    ports one matrix row after another, at most four pairs per line.
    """
    if corner not in figures.corners:
        raise ValueError(f"corner {corner!r} not among {list(figures.corners)}")
    if not (reference_ohm > 0 and math.isfinite(reference_ohm)):
        raise ValueError(f"reference_ohm must be finite and > 0, got {reference_ohm!r}")
    c = figures.corners.index(corner)
    z = figures.z[c] / reference_ohm
    n = z.shape[-1]
    r_text = format(reference_ohm, ".12g")
    lines = ["! " + line[2:] for line in _header(figures, "#", f"region Z-matrix at corner "
                                                          f"{corner}")]
    lines += [f"! port {k + 1}: region {name}" for k, name in enumerate(figures.region_names)]
    lines += [f"! Z-parameters, real/imaginary, normalized to R = {r_text} ohm",
              f"# Hz Z RI R {r_text}"]
    for f, zk in zip(figures.freq.tolist(), z):
        if n == 1:
            lines.append(f"{f:.11e} " + _pairs_lines([complex(zk[0, 0])])[0])
        elif n == 2:
            order = [zk[0, 0], zk[1, 0], zk[0, 1], zk[1, 1]]
            lines.append(f"{f:.11e} " + _pairs_lines([complex(v) for v in order])[0])
        else:
            for row in range(n):
                row_lines = _pairs_lines([complex(v) for v in zk[row]])
                first = f"{f:.11e} " if row == 0 else ""
                lines.append(first + row_lines[0])
                lines.extend(row_lines[1:])
    return "\n".join(lines) + "\n"


def render_droop_csv(figures: NetworkFigures) -> str:
    """Droop waveforms: t_s, then per corner and region ``droop_V_<region>_<corner>`` and per
    region ``current_A_<region>``; after damping also ``damped_droop_V_...`` columns."""
    run = figures.droop_run
    if run is None:
        raise ValueError("no droop run in these figures (NetworkGoals.droop was off)")
    lines = _header(figures, "#", "supply droop in time (nominal minus node voltage)")
    columns = ["t_s"]
    data = [run.t]
    for r, name in enumerate(run.regions):
        columns.append(f"current_A_{name}")
        data.append(run.current[:, r])
        for c, corner in enumerate(run.corners):
            columns.append(f"droop_V_{name}_{corner}")
            data.append(run.droop[c, :, r])
    after = figures.droop_run_after
    if after is not None and after.t.shape == run.t.shape:
        for r, name in enumerate(after.regions):
            for c, corner in enumerate(after.corners):
                columns.append(f"damped_droop_V_{name}_{corner}")
                data.append(after.droop[c, :, r])
    lines.append(",".join(columns))
    for row in np.column_stack(data).tolist():
        lines.append(",".join(format_value(v) for v in row))
    return "\r\n".join(lines) + "\r\n"


# ----------------------------------------------------------------------------- plots


def _svg(fig: Figure, key: str) -> str:
    """Inline SVG of ``fig`` with ids prefixed by ``key`` (several plots on one page)."""
    buffer = io.StringIO()
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "celllab-network"}):
        fig.savefig(buffer, format="svg", metadata={"Date": None})
    text = buffer.getvalue()
    text = text[text.index("<svg"):]
    prefix = "net-" + re.sub(r"[^A-Za-z0-9_-]", "_", key) + "-"
    text = re.sub(r'\bid="([^"]+)"', rf'id="{prefix}\1"', text)
    text = text.replace("url(#", f"url(#{prefix}").replace('href="#', f'href="#{prefix}')
    return text.strip()


def _log_label(value: float, _pos: int) -> str:
    if value <= 0:
        return ""
    for scale, unit in ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, "")):
        if value >= scale:
            return f"{value / scale:g}{unit}"
    return f"{value:.3g}"


def _freq_text(value: float) -> str:
    for scale, unit in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz")):
        if value >= scale:
            return f"{value / scale:.3g} {unit}"
    return f"{value:.3g} Hz"


def _ohm_text(value: float) -> str:
    return f"{value:.3g} ohm" if value >= 1 else f"{value * 1e3:.3g} mohm"


def _ohm_label(value: float, _pos: int) -> str:
    if value <= 0:
        return ""
    return f"{value * 1e3:g} m" if value < 1 else f"{value:g}"


def _panels(n: int, height: float = 3.0) -> tuple[Figure, list[Any]]:
    fig = Figure(figsize=(7.2, height * n))
    axes = fig.subplots(n, 1, squeeze=False)[:, 0]
    fig.subplots_adjust(left=0.11, right=0.97, bottom=0.08 if n > 1 else 0.16,
                        top=0.95 if n > 1 else 0.9, hspace=0.45)
    return fig, list(axes)


def _plot_impedance(figures: NetworkFigures) -> str:
    n = len(figures.regions)
    fig, axes = _panels(n)
    for k, (ax, reg) in enumerate(zip(axes, figures.regions)):
        for c, corner in enumerate(figures.corners):
            ax.loglog(figures.freq, np.abs(figures.z[c, :, k, k]),
                      color=_COLOURS[c % len(_COLOURS)], lw=1.2, label=corner)
        if math.isfinite(reg.target):
            ax.axhline(reg.target, color=_TARGET_COLOUR, lw=1.0, ls="--",
                       label=f"target {_ohm_text(reg.target)}")
        ax.axvspan(reg.band[1], figures.freq[-1], color="#000000", alpha=0.05, lw=0)
        for t in reg.resonances:
            marker = "v" if t.kind == "peak" else "^"
            ax.plot([t.frequency], [t.magnitude], marker=marker, ms=7, mfc="none",
                    mec="#222222", ls="none")
            ax.annotate(f"{_freq_text(t.frequency)}\nQ {t.q:.2g}", (t.frequency, t.magnitude),
                        textcoords="offset points", xytext=(7, -12 if t.kind == "peak" else 2),
                        fontsize=6.5, color="#222222")
        for axis, fmt in ((ax.xaxis, _log_label), (ax.yaxis, _ohm_label)):
            axis.set_major_formatter(FuncFormatter(fmt))
            axis.set_minor_locator(NullLocator())
        ax.set_title(f"region {reg.name}: impedance at its node (shaded: outside its band)",
                     fontsize=9)
        ax.set_xlabel("frequency (Hz)", fontsize=8)
        ax.set_ylabel("|Z| (ohm)", fontsize=8)
        ax.tick_params(labelsize=7)
        ax.grid(True, which="major", alpha=0.25)
        low, high = ax.get_ylim()
        ax.set_ylim(low, high * 1.6)  # room above the highest peak's marker
        ax.legend(fontsize=6.5, ncol=3, loc="upper left")
    return _svg(fig, "impedance")


def _plot_droop(figures: NetworkFigures) -> str | None:
    run = figures.droop_run
    if run is None:
        return None
    after = figures.droop_run_after
    fig, axes = _panels(len(run.regions), 2.6)
    for k, (ax, reg) in enumerate(zip(axes, figures.regions)):
        corner = reg.droop.get("worst_droop", (0.0, run.corners[0]))[1]
        c = run.corners.index(corner) if corner in run.corners else 0
        ax.plot(run.t * 1e9, run.droop[c, :, k] * 1e3, color=_COLOURS[0], lw=1.2,
                label=f"as planned ({run.corners[c]})")
        if after is not None:
            ax.plot(after.t * 1e9, after.droop[c, :, k] * 1e3, color=_COLOURS[1], lw=1.2,
                    ls="--", label="with entrance resistors")
        ax.set_title(f"region {reg.name}: droop at its worst corner", fontsize=9)
        ax.set_xlabel("time (ns)", fontsize=8)
        ax.set_ylabel("droop (mV)", fontsize=8)
        ax.tick_params(labelsize=7)
        ax.grid(True, alpha=0.25)
        ax.legend(fontsize=6.5)
    return _svg(fig, "droop")


def _plot_emission(figures: NetworkFigures) -> str | None:
    if not figures.emission:
        return None
    fig, axes = _panels(1, 3.2)
    ax = axes[0]
    width = {name: k for k, name in enumerate(figures.emission)}
    for name, spectrum in figures.emission.items():
        level, _ = spectrum.worst()
        shift = 1.0 + 0.012 * (width[name] - (len(width) - 1) / 2)
        ax.semilogx(spectrum.freq * shift, level, marker="o", ms=3.5, ls="none",
                    color=_COLOURS[width[name] % len(_COLOURS)], label=name)
    for band in figures.emission_bands:
        ax.axvline(band.band.f_lo, color="#999999", lw=0.6)
        ax.text(band.band.f_lo * 1.05, 1.0, band.band.name.split()[0], fontsize=7,
                color="#666666", transform=ax.get_xaxis_transform(), va="top")
    ax.xaxis.set_major_formatter(FuncFormatter(_log_label))
    ax.xaxis.set_minor_locator(NullLocator())
    ax.set_title("1 ohm ground-return probe, each harmonic at its loudest corner", fontsize=9)
    ax.set_xlabel("frequency (Hz)", fontsize=8)
    ax.set_ylabel("level (dBuV)", fontsize=8)
    ax.tick_params(labelsize=7)
    ax.grid(True, alpha=0.25)
    ax.legend(fontsize=7)
    return _svg(fig, "emission")


# ----------------------------------------------------------------------------- HTML


def _t(value: Any) -> str:
    return html.escape(str(value))


def _num(value: float, scale: float = 1.0, digits: int = 3) -> str:
    if value is None or not math.isfinite(value):
        return "&ndash;"
    return f"{value * scale:.{digits}g}"


def _table(head: Sequence[str], rows: Sequence[Sequence[str]], caption: str = "") -> str:
    cap = f"<caption>{_t(caption)}</caption>" if caption else ""
    th = "".join(f"<th>{_t(h)}</th>" for h in head)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in row) + "</tr>" for row in rows)
    return f'<table class="net-table">{cap}<thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>'


def _with_corner(pair: tuple[float, str] | None, scale: float, unit: str) -> str:
    if not pair:
        return "&ndash;"
    value, corner = pair
    if not math.isfinite(value):
        return "not within the run" if unit == "ns" else "&ndash;"
    return f"{_num(value, scale)} {unit} <span class=\"net-corner\">{_t(corner)}</span>"


def _region_section(reg: RegionFigures, figures: NetworkFigures) -> str:
    check = reg.check
    parts = [f"<h4>Region {_t(reg.name)}</h4>"]
    if check is None:
        parts.append(f"<p>Quiet region (no switching current of its own): no target; band "
                     f"{_num(reg.band[0], 1e-6)} to {_num(reg.band[1], 1e-6)} MHz. DC drop at "
                     f"the average currents: {_num(reg.dc_drop, 1e3)} mV.</p>")
    else:
        verdict = "meets" if check.passes else "exceeds"
        parts.append(
            f"<p>Target {_num(reg.target, 1e3)} mohm over {_num(reg.band[0], 1e-6)} to "
            f"{_num(reg.band[1], 1e-6)} MHz: the worst point {verdict} it at "
            f"{_num(check.worst_ratio)} x target, {_num(check.worst_frequency, 1e-6)} MHz "
            f"(<span class=\"net-corner\">{_t(reg.check_corner)}</span>). DC drop at the "
            f"average currents: {_num(reg.dc_drop, 1e3)} mV.</p>")
    rows = [[_t(t.kind), _num(t.frequency, 1e-6, 4), _num(t.magnitude, 1e3), _num(t.q),
             _t(t.q_method), _t(t.corner), str(len(t.per_corner))] for t in reg.resonances]
    parts.append(_table(["kind", "f (MHz)", "|Z| (mohm)", "Q", "Q from", "worst corner",
                         "corners"], rows, "resonances (peak: parallel, dip: series)"))
    if reg.transfer_peak:
        rows = [[_t(o), _num(m, 1e3), _num(f, 1e-6), _t(c)]
                for o, (m, f, c) in reg.transfer_peak.items()]
        parts.append(_table(["from region", "max |Z_transfer| (mohm)", "at (MHz)", "corner"],
                            rows, "transfer impedance: this node's voltage per ampere drawn "
                            "elsewhere, in band"))
    if reg.cell_damping:
        rows = [[_t(d.cell), _num(d.count, 1, 6), _num(d.capacitance, 1e15), _num(d.esr_at_f0),
                 _num(d.match), _num(d.score), _num(d.total_conductance)]
                for d in reg.cell_damping]
        parts.append(_table(["cell", "count", "C (fF)", "ESR at f0 (ohm)", "x = w0 ESR C",
                             "score g/(w0 C)", "count x g (S)"], rows,
                            f"damping of the peak at {_num(reg.cell_damping[0].f0, 1e-6)} MHz by "
                            "each fill cell (x = 1 is matched; fill conductance needed for the "
                            f"target: {_num(reg.conductance_needed)} S)"))
    if reg.droop:
        d, a = reg.droop, reg.droop_after
        names = [("first_droop", 1e3, "mV", "first droop"),
                 ("first_droop_time", 1e9, "ns", "first droop at"),
                 ("worst_droop", 1e3, "mV", "worst droop"),
                 ("overshoot", 1e3, "mV", "overshoot"),
                 ("ringing_frequency", 1e-6, "MHz", "ringing"),
                 ("ringing_q", 1.0, "", "ringing Q"),
                 ("settling_time", 1e9, "ns", "settling"),
                 ("settled_droop", 1e3, "mV", "settled droop")]
        rows = [[_t(label), _with_corner(d.get(key), s, u)]
                + ([_with_corner(a.get(key), s, u)] if a else [])
                for key, s, u, label in names]
        parts.append(_table(["figure", "as planned"] + (["with entrance resistors"] if a else []),
                            rows, "droop in time, each figure at its own worst corner"))
    return "\n".join(parts)


def render_network_html(figures: NetworkFigures, title: str = "Supply network") -> str:
    """An HTML ``<section>`` (no page wrapper, inline CSS scoped by class) for a plan report:
    caution, policy, per-region tables, the damping trade, emission bands and SVG plots."""
    parts = [
        '<section class="net-report">',
        "<style>.net-report{font-family:system-ui,sans-serif;color:#1c1c1c}"
        ".net-report h3{border-bottom:2px solid #0b5d7a;padding-bottom:2px}"
        ".net-caution{border-left:4px solid #b3471d;background:#fbf3ee;padding:6px 10px}"
        ".net-table{border-collapse:collapse;margin:6px 0 12px;font-size:0.85em}"
        ".net-table td,.net-table th{border:1px solid #c9d3d8;padding:2px 6px;text-align:right}"
        ".net-table th{background:#e8f1f4}.net-table caption{text-align:left;"
        "font-style:italic;color:#444}.net-corner{color:#6a3d9a;font-size:0.85em}</style>",
        f"<h3>{_t(title)}</h3>",
        f'<p class="net-caution"><strong>Caution:</strong> {_t(NETWORK_CAUTION)}</p>',
        f"<p>Corners evaluated: {_t(', '.join(figures.corners))}. Policy: {_t(figures.policy)}."
        "</p>",
    ]
    for note in figures.notes:
        parts.append(f"<p class=\"net-note\">Note: {_t(note)}</p>")
    parts.append(f"<figure>{_plot_impedance(figures)}<figcaption>|Z| at each region's node for "
                 "every corner, its target (dashed) and its resonances (marked)</figcaption>"
                 "</figure>")
    for reg in figures.regions:
        parts.append(_region_section(reg, figures))
    trade = figures.damping
    if trade is not None:
        rows = []
        for k, name in enumerate(figures.region_names):
            ac = figures.damping_ac_power[k] if figures.damping_ac_power is not None else math.nan
            rows.append([_t(name), _num(trade.resistance[k], 1e3),
                         _num(trade.peak_before.magnitude[k], 1e3),
                         _num(trade.peak_after.magnitude[k], 1e3),
                         _num(trade.ir_drop_before[k], 1e3), _num(trade.ir_drop_after[k], 1e3),
                         _num(trade.ir_drop_limit[k], 1e3), _num(trade.power[k], 1e3),
                         _num(ac, 1e3)])
        parts.append(_table(["region", "R entrance (mohm)", "peak |Z| before (mohm)",
                             "after (mohm)", "IR drop before (mV)", "after (mV)", "limit (mV)",
                             "DC power (mW)", "harmonic power (mW)"], rows,
                            "entrance resistors: what they buy and cost (peaks at each "
                            f"region's worst corner; optimizer: {trade.message})"))
    svg = _plot_droop(figures)
    if svg is not None:
        parts.append(f"<figure>{svg}<figcaption>droop at each region's worst corner"
                     "</figcaption></figure>")
    if figures.emission_bands:
        labels = list(figures.emission)
        rows = []
        for b in figures.emission_bands:
            rows.append([_t(b.band.name)] + [f"{_num(b.level_dBuV[n], 1, 4)} "
                                             f"<span class=\"net-corner\">{_t(b.corner[n])}</span>"
                                             for n in labels]
                        + [_num(b.level_dBuV[n] - b.level_dBuV["plan"], 1, 3)
                           for n in labels if n != "plan"])
        parts.append(_table(["band"] + [f"{n} (dBuV)" for n in labels]
                            + [f"{n} minus plan (dB)" for n in labels if n != "plan"], rows,
                            "conducted emission, 1 ohm probe in the ground return: highest "
                            "harmonic per band at its loudest corner"))
        svg = _plot_emission(figures)
        if svg is not None:
            parts.append(f"<figure>{svg}<figcaption>harmonic levels across the 1 ohm probe"
                         "</figcaption></figure>")
    parts.append(f'<p class="net-caution">{_t(NETWORK_CAUTION)}</p>')
    parts.append("</section>")
    return "\n".join(parts) + "\n"


def write_network_files(figures: NetworkFigures, folder: str | os.PathLike[str],
                        stem: str = "network", force: bool = False) -> list[Path]:
    """Write ``<stem>_z.csv``, ``<stem>_<corner>.sNp``, ``<stem>_droop.csv`` (with a droop
    run) and ``<stem>.html`` into ``folder`` (created): everything rendered and every target
    checked first, each file atomic, an existing file replaced only with ``force``
    (``export.files.write_files_atomic``)."""
    n = len(figures.region_names)
    stem = file_stem(stem)
    texts = {f"{stem}_z.csv": render_z_csv(figures)}
    for corner in figures.corners:
        texts[f"{stem}_{file_stem(corner)}.s{n}p"] = render_z_touchstone(figures, corner)
    if figures.droop_run is not None:
        texts[f"{stem}_droop.csv"] = render_droop_csv(figures)
    texts[f"{stem}.html"] = render_network_html(figures)
    return write_files_atomic(folder, texts, force=force)

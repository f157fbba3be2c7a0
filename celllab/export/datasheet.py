"""HTML datasheets: one page per cell, or one page for a whole library of cells.

Pages are self-contained (inline CSS, plots as inline SVG drawn with matplotlib's
object-oriented API, no pyplot state, no scripts, no external files) and carry the caution
at the top and the bottom. Plots: |Z| versus frequency per corner, effective capacitance and
series resistance versus frequency, and the C-V curve with its operating point.
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

from celllab import MODEL_VERSION, __version__
from celllab.cells.expand import applicable_geometry
from celllab.columns import CELL_COLUMNS, METRICS, is_lower_bound, unit_of
from celllab.display import LOWER_BOUND, format_metric, format_value
from celllab.export import CAUTION, atomic_write_text
from celllab.records import CellResult, CornerResult, corner_metrics
from celllab.units import from_si

__all__ = [
    "render_datasheet_html",
    "render_datasheet_pdf",
    "render_library_html",
    "write_datasheet",
    "write_library_datasheet",
]

#: Line colours, one per corner (cycled).
_PALETTE = ("#1b6f8a", "#c05621", "#4f7f2b", "#7a3e9d", "#a3862a", "#555555")

#: Metrics of the library summary table (those present in METRICS).
_SUMMARY_METRICS = (
    "cap_fF",
    "cap_density_fF_per_um2",
    "esr_ohm",
    "bandwidth_GHz",
    "srf_GHz",
    "leakage_nA",
    "tddb_fit_per_mm2",
)

_ESD_WARNING = (
    "A gate of this cell is tied directly to a rail: the thin oxide sees the full rail "
    "voltage during an ESD event. Check it against the block's clamp plan."
)

_CSS = """
body { font-family: system-ui, sans-serif; margin: 2em auto; max-width: 60em; color: #1d1d1d; }
h1 { font-size: 1.5em; margin-bottom: 0.2em; }
h2 { font-size: 1.15em; border-bottom: 1px solid #bbb; margin-top: 1.6em; }
.meta { color: #555; margin-top: 0; }
.caution { border: 2px solid #b7791f; background: #fff8e6; padding: 0.6em 0.9em; }
.warning { border-left: 4px solid #b83232; background: #fdf0f0; padding: 0.4em 0.8em; }
table { border-collapse: collapse; margin: 0.5em 0; }
th, td { border: 1px solid #ccc; padding: 0.2em 0.6em; text-align: right; }
th:first-child, td:first-child { text-align: left; }
thead th { background: #eef2f4; }
pre { background: #f4f4f4; padding: 0.6em; overflow-x: auto; font-size: 0.85em; }
figure { margin: 1em 0; }
figcaption { color: #555; font-size: 0.9em; }
.cell { page-break-before: always; }
.wide { overflow-x: auto; max-width: 100%; }
.summary th { font-size: 0.8em; }
.summary td { font-size: 0.85em; }
summary { cursor: pointer; color: #1b4f6a; }
"""


def _text(value: Any) -> str:
    return html.escape(str(value), quote=False)


def _attr(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _anchor(name: str) -> str:
    return "cell-" + re.sub(r"[^A-Za-z0-9_-]", "_", name)


def _fmt(value: Any) -> str:
    """A table number: 4 significant digits, 'n/a' when missing or undefined."""
    return format_value(value, empty="n/a")


# ----------------------------------------------------------------------------- plots


def _svg(fig: Figure, key: str) -> str:
    """Inline SVG text of ``fig``; ids prefixed with ``key`` so several plots share a page."""
    buffer = io.StringIO()
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "celllab"}):
        fig.savefig(buffer, format="svg", metadata={"Date": None})
    text = buffer.getvalue()
    text = text[text.index("<svg") :]
    prefix = "fig-" + re.sub(r"[^A-Za-z0-9_-]", "_", key) + "-"
    text = re.sub(r'\bid="([^"]+)"', rf'id="{prefix}\1"', text)
    text = text.replace("url(#", f"url(#{prefix}").replace('href="#', f'href="#{prefix}')
    return text.strip()


def _figure(ncols: int = 1) -> tuple[Figure, Any]:
    # Fixed margins instead of a layout engine: several times faster to draw.
    fig = Figure(figsize=(6.4 if ncols == 1 else 9.6, 3.6))
    axes = fig.subplots(1, ncols)
    fig.subplots_adjust(
        left=0.1 if ncols == 1 else 0.07, right=0.97, bottom=0.15, top=0.9, wspace=0.28
    )
    return fig, axes


def _plain_log_label(value: float, _pos: int) -> str:
    """Log-axis tick label as plain text (``1e6``): no mathtext, which is slow to lay out."""
    if value <= 0:
        return ""
    exponent = math.log10(value)
    if abs(exponent - round(exponent)) < 1e-9:
        return f"1e{round(exponent)}"
    return f"{value:.3g}"


def _log_axis(axis: Any) -> None:
    # No minor ticks: drawing them is most of the plotting time on a log axis.
    axis.set_major_formatter(FuncFormatter(_plain_log_label))
    axis.set_minor_locator(NullLocator())


def _plot_impedance(cell: CellResult, key: str) -> str:
    return _svg(_impedance_figure(cell), key)


def _impedance_figure(cell: CellResult) -> Figure:
    fig, ax = _figure()
    for index, result in enumerate(cell.corners):
        freq = np.asarray(result.response.freq_Hz, dtype=float)
        magnitude = np.abs(np.asarray(result.response.z_ohm, dtype=complex))
        ax.loglog(freq, magnitude, color=_PALETTE[index % len(_PALETTE)], label=result.corner)
    _log_axis(ax.xaxis)
    _log_axis(ax.yaxis)
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("|Z| (ohm)")
    ax.set_title(f"{cell.name}: rail impedance")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize="small")
    return fig


def _plot_ceff_esr(cell: CellResult, key: str) -> str:
    return _svg(_ceff_esr_figure(cell), key)


def _ceff_esr_figure(cell: CellResult) -> Figure:
    fig, (ax_c, ax_r) = _figure(ncols=2)
    spans: list[np.ndarray] = []
    for index, result in enumerate(cell.corners):
        colour = _PALETTE[index % len(_PALETTE)]
        freq = np.asarray(result.response.freq_Hz, dtype=float)
        z = np.asarray(result.response.z_ohm, dtype=complex)
        with np.errstate(divide="ignore", invalid="ignore"):
            c_eff = -1.0 / (2 * np.pi * freq * z.imag)
        c_eff = np.where(np.isfinite(c_eff) & (c_eff > 0), c_eff, np.nan)
        ax_c.semilogx(freq, from_si(c_eff, "fF"), color=colour, label=result.corner)
        resistance = np.where(z.real > 0, z.real, np.nan)
        ax_r.semilogx(freq, resistance, color=colour, label=result.corner)
        spans.append(resistance)
    values = np.concatenate(spans) if spans else np.array([])
    values = values[np.isfinite(values)]
    if values.size and values.max() > 10 * values.min():  # log only over a decade or more
        ax_r.set_yscale("log")
        _log_axis(ax_r.yaxis)
    for axis in (ax_c.xaxis, ax_r.xaxis):
        _log_axis(axis)
    ax_c.set_xlabel("frequency (Hz)")
    ax_c.set_ylabel("C_eff (fF)")
    ax_c.set_title("effective capacitance")
    ax_r.set_xlabel("frequency (Hz)")
    ax_r.set_ylabel("Re Z (ohm)")
    ax_r.set_title("series resistance")
    for ax in (ax_c, ax_r):
        ax.grid(True, alpha=0.3)
    ax_c.legend(fontsize="small")
    return fig


def _plot_cv(cell: CellResult, key: str) -> str | None:
    fig = _cv_figure(cell)
    return None if fig is None else _svg(fig, key)


def _cv_figure(cell: CellResult) -> Figure | None:
    curves = [(i, c) for i, c in enumerate(cell.corners) if c.cv is not None]
    if not curves:
        return None
    fig, ax = _figure()
    for index, result in curves:
        cv = result.cv
        assert cv is not None
        colour = _PALETTE[index % len(_PALETTE)]
        ax.plot(
            np.asarray(cv.bias_V), from_si(np.asarray(cv.cap_F), "fF"), color=colour, label=result.corner
        )
        ax.plot([cv.operating_bias_V], [from_si(cv.operating_cap_F, "fF")], "o", color=colour)
    ax.set_xlabel("gate-to-body bias (V)")
    ax.set_ylabel("C (fF)")
    ax.set_title("quasi-static C-V (dots: operating point)")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize="small")
    return fig


def _plot_library(cells: Sequence[CellResult], key: str) -> str:
    fig, ax = _figure()
    worst = [corner_metrics(c, "worst") for c in cells]
    x = np.array([w["cap_density_fF_per_um2"] for w in worst], dtype=float)
    y = np.array([w["leakage_nA_per_nF"] for w in worst], dtype=float)
    safe = np.array([c.esd_safe for c in cells], dtype=bool)
    ax.scatter(x[safe], y[safe], marker="o", color=_PALETTE[0], label="ESD safe")
    ax.scatter(x[~safe], y[~safe], marker="^", color=_PALETTE[1], label="gate tied to rail")
    if np.all(y[np.isfinite(y)] > 0) and np.isfinite(y).any():
        ax.set_yscale("log")
        _log_axis(ax.yaxis)
    ax.set_xlabel("capacitance density, worst corner (fF/um^2)")
    ax.set_ylabel("leakage per nF, worst corner (nA/nF)")
    ax.set_title("library overview")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize="small")
    return _svg(fig, key)


# ----------------------------------------------------------------------------- sections


def _caution_block() -> str:
    return f'<p class="caution"><strong>Caution.</strong> {_text(CAUTION)}</p>'


def _cell_table(cell: CellResult) -> str:
    rows = [
        ("family", cell.family),
        ("topology", cell.topology),
        ("oxide", cell.oxide),
        ("ESD safe (no gate tied to a rail)", "yes" if cell.esd_safe else "no"),
    ]
    rows += [
        (f"{name} ({info.unit})" if info.unit else name, _fmt(getattr(cell, name)))
        for name, info in CELL_COLUMNS.items()
        if name != "esd_safe"
    ]
    # only what applies to this topology; derived counts of zero (no devices in a MOM) left out
    given, derived = applicable_geometry(cell)
    rows += [(f"geometry: {k}", _fmt(v)) for k, v in given.items()]
    rows += [(f"derived: {k}", _fmt(v)) for k, v in derived.items()]
    rows.append(("cell hash", cell.cell_hash))
    body = "".join(f'<tr><th scope="row">{_text(k)}</th><td>{_text(v)}</td></tr>' for k, v in rows)
    return f"<table>{body}</table>"


def _metrics_table(corners: Sequence[CornerResult]) -> str:
    head = "".join(f'<th scope="col">{_text(c.corner)}</th>' for c in corners)
    conditions = "".join(
        f"<td>{_fmt(c.temperature_C)} {unit_of('temperature_C')}, {_fmt(c.supply_V)} {unit_of('supply_V')}</td>"
        for c in corners
    )
    rows = [f'<tr><th scope="row">conditions</th><td></td><td></td>{conditions}</tr>']
    bounds = False
    for info in METRICS:
        values = [c.metrics.get(info.name) for c in corners]
        if all(v is None or v != v for v in values):
            continue  # does not apply to this cell (no gate oxide in a MOM cell, ...)
        bounds = bounds or any(is_lower_bound(c, info.name) for c in corners)
        cells = "".join(f"<td>{_text(format_metric(c.metrics, info.name, 'n/a'))}</td>" for c in corners)
        rows.append(
            f'<tr><th scope="row" title="{_attr(info.description)}">{_text(info.name)}</th>'
            f"<td>{_text(info.unit)}</td><td>{_text(info.better)}</td>{cells}</tr>"
        )
    note = (f"<p>{LOWER_BOUND}: a lower bound, the quantity lies beyond the analysed "
            "frequency sweep.</p>" if bounds else "")
    return (
        '<div class="wide"><table><thead><tr><th scope="col">metric</th><th scope="col">unit</th>'
        f'<th scope="col">better</th>{head}</tr></thead><tbody>{"".join(rows)}</tbody></table>'
        f"</div>{note}"
    )


def _flags_and_notes(cell: CellResult) -> str:
    items = [f"<li>{_text(c.corner)}: {_text(flag)}</li>" for c in cell.corners for flag in c.flags]
    items += [f"<li>{_text(note)}</li>" for note in cell.notes]
    if not items:
        return "<p>No model-range warnings.</p>"
    return f"<ul>{''.join(items)}</ul>"


def _figure_block(svg: str | None, caption: str) -> str:
    if svg is None:
        return ""
    return f"<figure>{svg}<figcaption>{_text(caption)}</figcaption></figure>"


def _circuit_block(cell: CellResult, deck_name: str | None, model_version: str) -> str:
    if cell.netlist is None:
        return "<p>No equivalent circuit stored for this cell.</p>"
    from celllab.export.spice import render_spice_subckt

    first = cell.corners[0].corner if cell.corners else None
    text = render_spice_subckt(cell, first, deck_name=deck_name, model_version=model_version)
    note = (
        f"<p>SPICE subcircuit at corner {_text(first)}; the other corners are exported by "
        "the spice format with a corner name.</p>"
        if first
        else ""
    )
    lines = text.count("\n") + 1
    return (f"{note}<details><summary>SPICE subcircuit ({lines} lines)</summary>"
            f"<pre>{_text(text)}</pre></details>")


def _cell_section(
    cell: CellResult, deck_name: str | None, model_version: str, plots: bool, level: int
) -> str:
    key = _anchor(cell.name)
    h = f"h{level}"
    parts = [f"<{h}>Metrics per corner</{h}>", _metrics_table(cell.corners)]
    if not cell.esd_safe:
        parts.append(f'<p class="warning">{_text(_ESD_WARNING)}</p>')
    parts += [f"<{h}>Cell</{h}>", _cell_table(cell)]
    if plots:
        parts += [
            f"<{h}>Plots</{h}>",
            _figure_block(_plot_impedance(cell, f"{key}-z"), "Magnitude of Z(vdd, vss)."),
            _figure_block(
                _plot_ceff_esr(cell, f"{key}-ceff"),
                "C_eff = -1/(2 pi f Im Z), shown where positive; Re Z.",
            ),
            _figure_block(_plot_cv(cell, f"{key}-cv"), "Quasi-static C-V."),
        ]
    parts += [
        f"<{h}>Warnings and notes</{h}>",
        _flags_and_notes(cell),
        f"<{h}>Equivalent circuit</{h}>",
        _circuit_block(cell, deck_name, model_version),
    ]
    return "\n".join(p for p in parts if p)


def _page(title: str, body: str) -> str:
    return (
        '<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
        f"<title>{_text(title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n{body}\n"
        f"<footer>{_caution_block()}</footer>\n</body>\n</html>\n"
    )


def _meta_line(deck_name: str | None, model_version: str, generated_utc: str | None) -> str:
    when = f"; generated {_text(generated_utc)}" if generated_utc else ""
    return (
        f'<p class="meta">deck {_text(deck_name or "unknown")}; models {_text(model_version)}; '
        f"celllab {_text(__version__)}{when}</p>"
    )


def render_datasheet_html(
    cell: CellResult,
    deck_name: str | None,
    model_version: str = MODEL_VERSION,
    plots: bool = True,
    generated_utc: str | None = None,
) -> str:
    """Render a one-cell HTML datasheet.

    Parameters
    ----------
    cell : CellResult
    deck_name : str or None   process deck the cell was characterized under
    model_version : str   written in the header
    plots : bool   embed the SVG plots (|Z|, C_eff and Re Z, C-V)
    generated_utc : str, optional   timestamp text for the header (none by default, so the
        output is reproducible)

    Returns
    -------
    str   a complete HTML5 document
    """
    body = "\n".join(
        [
            f"<h1>{_text(cell.name)}</h1>",
            _meta_line(deck_name, model_version, generated_utc),
            _caution_block(),
            _cell_section(cell, deck_name, model_version, plots, level=2),
        ]
    )
    return _page(f"{cell.name} - celllab datasheet", body)


def _summary_table(cells: Sequence[CellResult], corner: str | None,
                   link: Any = None) -> str:
    units = {m.name: m.unit for m in METRICS}
    shown = [m for m in _SUMMARY_METRICS if m in units]
    head = "".join(f'<th scope="col">{_text(m)}<br>({_text(units[m])})</th>' for m in shown)
    every = corner is None  # no corner singled out: a row per cell and corner
    rows = []
    for cell in cells:
        picks = [c.corner for c in cell.corners] if every else [corner]
        for pick in picks:
            values = corner_metrics(cell, pick)
            tds = "".join(f"<td>{_text(format_metric(values, m, 'n/a'))}</td>" for m in shown)
            target = link(cell) if link else f"#{_anchor(cell.name)}"
            rows.append(
                f'<tr><td><a href="{_attr(target)}">{_text(cell.name)}</a></td>'
                + (f"<td>{_text(pick)}</td>" if every else "")
                + f"<td>{_text(cell.topology)}</td><td>{_fmt(cell.area_um2)}</td>"
                f"<td>{'yes' if cell.esd_safe else 'no'}</td>{tds}</tr>"
            )
    return (
        '<div class="wide"><table class="summary"><thead><tr><th scope="col">cell</th>'
        + ('<th scope="col">corner</th>' if every else "")
        + '<th scope="col">topology</th><th scope="col">area_um2<br>(um^2)</th>'
        '<th scope="col">ESD safe</th>'
        f"{head}</tr></thead><tbody>{''.join(rows)}</tbody></table></div>"
    )


def render_library_html(
    cells: Sequence[CellResult],
    deck_name: str | None,
    corner: str | None = "worst",
    model_version: str = MODEL_VERSION,
    plots: bool = True,
    title: str | None = None,
    generated_utc: str | None = None,
    link: Any = None,
) -> str:
    """Render one HTML page for a library of cells: summary table, overview plot, a section
    per cell (the datasheet body).

    ``link``: a function cell -> URL of the cell's own datasheet; given, the page is an index
    (summary and overview linking to those pages, no per-cell sections), which keeps it small.

    ``corner`` selects the values of the summary table (``celllab.columns`` corner
    selectors): a corner name, "worst" / "best" per metric over the corners (default worst),
    or None for a row per corner.
    """
    heading = title or f"celllab cell library: {deck_name or 'unknown deck'}"
    which = {"worst": "worst over corners, per metric", "best": "best over corners, per metric",
             None: "every corner"}.get(corner, f"corner {corner}")
    parts = [
        f"<h1>{_text(heading)}</h1>",
        _meta_line(deck_name, model_version, generated_utc),
        _caution_block(),
        f"<h2>Summary ({_text(which)}; {len(cells)} cells)</h2>",
        _summary_table(cells, corner, link),
    ]
    if plots and cells:
        parts.append(
            _figure_block(
                _plot_library(cells, "library"), "Each point one cell; values at its worst corner."
            )
        )
    for cell in cells if link is None else ():
        parts.append(
            f'<section class="cell" id="{_attr(_anchor(cell.name))}">'
            f"<h2>{_text(cell.name)}</h2>\n"
            f"{_cell_section(cell, deck_name, model_version, plots, level=3)}</section>"
        )
    return _page(heading, "\n".join(parts))


def write_datasheet(
    path: str | os.PathLike[str],
    cell: CellResult,
    deck_name: str | None,
    force: bool = False,
    **options: Any,
) -> Path:
    """Write :func:`render_datasheet_html` output to ``path`` atomically (``force``: replace a
    file)."""
    return atomic_write_text(path, render_datasheet_html(cell, deck_name, **options), force)


def write_library_datasheet(
    path: str | os.PathLike[str],
    cells: Sequence[CellResult],
    deck_name: str | None,
    force: bool = False,
    **options: Any,
) -> Path:
    """Write :func:`render_library_html` output to ``path`` atomically (``force``: replace a
    file)."""
    return atomic_write_text(path, render_library_html(cells, deck_name, **options), force)


# ----------------------------------------------------------------------------- PDF


def _text_page(cell: CellResult, deck_name: str | None, model_version: str) -> Figure:
    """Page 1 of a PDF datasheet: identity, the caution and the metrics per corner."""
    import textwrap

    fig = Figure(figsize=(8.27, 11.69))  # A4 portrait, inches
    fig.text(0.06, 0.96, cell.name, fontsize=16, weight="bold", va="top")
    given, derived = applicable_geometry(cell)
    lines = [
        f"deck {deck_name or 'unknown'} · models {model_version} · celllab {__version__}",
        f"{cell.topology} · {cell.oxide} oxide · "
        + ("ESD safe (no gate on a rail)" if cell.esd_safe else "gate tied to a rail: not ESD safe"),
        f"area {_fmt(cell.area_um2)} um^2 ({cell.width_sites} sites x {cell.height_rows} rows)",
        "geometry: " + ", ".join(f"{k}={_fmt(v)}" for k, v in given.items()),
    ]
    y = 0.925
    for line in lines:
        for part in textwrap.wrap(line, 100):
            fig.text(0.06, y, part, fontsize=8.5, va="top")
            y -= 0.018
    y -= 0.01
    for part in textwrap.wrap("Caution. " + CAUTION, 110):
        fig.text(0.06, y, part, fontsize=8, va="top", color="#7a4b00")
        y -= 0.016
    corners = cell.corners
    rows, bound_seen = [], False
    for info in METRICS:
        values = [c.metrics.get(info.name) for c in corners]
        if all(v is None or v != v for v in values):
            continue
        shown = []
        for c, v in zip(corners, values):
            bound = is_lower_bound(c, info.name)
            bound_seen = bound_seen or bound
            shown.append((">=" if bound else "") + _fmt(v))
        rows.append([info.name, info.unit, *shown])
    top = y - 0.02
    height = min(0.03 * (len(rows) + 1), top - 0.08)
    ax = fig.add_axes((0.06, top - height, 0.88, height))
    ax.axis("off")
    table = ax.table(cellText=rows, colLabels=["metric", "unit", *[c.corner for c in corners]],
                     loc="upper left", cellLoc="right", colLoc="right")
    table.auto_set_font_size(False)
    table.set_fontsize(7.5)
    table.auto_set_column_width(list(range(len(corners) + 2)))
    for (_row, col), box in table.get_celld().items():
        if col == 0:  # metric names read from the left
            box.set_text_props(ha="left")
            box._loc = "left"
    if bound_seen:
        fig.text(0.06, top - height - 0.02, ">= : a lower bound, the quantity lies beyond the "
                 "analysed frequency sweep.", fontsize=7.5, va="top")
    return fig


def render_datasheet_pdf(cell: CellResult, deck_name: str | None,
                         model_version: str = MODEL_VERSION) -> bytes:
    """A one-cell datasheet as PDF (matplotlib's PDF backend): page 1 identity, caution and
    the metrics per corner; then |Z|(f), C_eff and Re Z, and C-V of every corner."""
    from matplotlib.backends.backend_pdf import PdfPages

    buffer = io.BytesIO()
    figures = [_text_page(cell, deck_name, model_version), _impedance_figure(cell),
               _ceff_esr_figure(cell), _cv_figure(cell)]
    with PdfPages(buffer, metadata={"Title": f"{cell.name} - celllab datasheet",
                                    "Creator": f"celllab {__version__}",
                                    "CreationDate": None}) as pdf:
        for fig in figures:
            if fig is not None:
                pdf.savefig(fig)
    return buffer.getvalue()


def write_datasheet_pdf(path: str | os.PathLike[str], cell: CellResult, deck_name: str | None,
                        **options: Any) -> Path:
    """Write :func:`render_datasheet_pdf` output to ``path`` atomically."""
    target = Path(path)
    tmp = target.with_name(f".{target.name}.tmp")
    tmp.write_bytes(render_datasheet_pdf(cell, deck_name, **options))
    os.replace(tmp, target)
    return target

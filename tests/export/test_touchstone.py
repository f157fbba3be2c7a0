"""Touchstone v1.1 export, read back by scikit-rf's reader."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

skrf = pytest.importorskip("skrf")

from celllab.export import CAUTION
from celllab.export.touchstone import (
    render_touchstone,
    touchstone_filename,
    write_touchstone,
)
from celllab.records import FrequencyResponse


def read_with_skrf(path):
    network = skrf.Network(str(path))
    return network.f, network.z[:, 0, 0], network


def data_lines(text: str) -> list[list[float]]:
    rows = []
    for line in text.splitlines():
        if line.startswith(("!", "#")) or not line.strip():
            continue
        rows.append([float(x) for x in line.split()])
    return rows


@pytest.mark.parametrize("reference_ohm", [1.0, 50.0])
def test_skrf_reads_back_the_impedance(tmp_path, library, deck_name, reference_ohm):
    # Source: Touchstone File Format Specification v1.1 (IBIS Open Forum), read by
    # scikit-rf's Touchstone reader. 12 significant digits are written (each number rel
    # 5e-12); scikit-rf stores S and converts back to Z, which costs about |Z|/R x 1e-16, so
    # the read-back check is rel 1e-8 on the complex Z.
    for cell in library:
        for result in cell.corners:
            path = tmp_path / touchstone_filename(cell.name, result.corner)
            write_touchstone(path, cell, result.corner, deck_name, reference_ohm)
            stored = np.array(data_lines(path.read_text()))
            np.testing.assert_allclose(stored[:, 0], result.response.freq_Hz, rtol=5e-12)
            written = (stored[:, 1] + 1j * stored[:, 2]) * reference_ohm
            assert np.all(
                np.abs(written - result.response.z_ohm) <= 1e-11 * np.abs(result.response.z_ohm)
            )
            freq, z, network = read_with_skrf(path)
            np.testing.assert_allclose(freq, result.response.freq_Hz, rtol=1e-10)
            assert np.all(np.abs(z - result.response.z_ohm) <= 1e-8 * np.abs(result.response.z_ohm))
            np.testing.assert_allclose(network.z0[:, 0], reference_ohm)


def test_v1_z_file_is_normalized_to_the_reference(tmp_path, make_cell):
    # Source: docs/references.md [120] [DF]: 10 mohm ESR + 100 nF at 1 MHz; '# Hz Z RI R 50' stores
    # 2.0e-4, -3.18310e-2 (Z = 0.01 - j1.591549 ohm); rel 1e-5.
    freq = np.array([1e6])
    z = 0.01 + 1.0 / (1j * 2 * np.pi * freq * 100e-9)
    cell = make_cell(response=FrequencyResponse(freq, z))
    text = render_touchstone(cell, deck_name="demo", reference_ohm=50.0)
    assert "# Hz Z RI R 50" in text.splitlines()
    ((f, re_part, im_part),) = data_lines(text)
    assert f == pytest.approx(1e6, rel=1e-12)
    assert re_part == pytest.approx(2.0e-4, rel=1e-5)
    assert im_part == pytest.approx(-3.18310e-2, rel=1e-5)
    path = tmp_path / "ref.s1p"
    path.write_text(text)
    _, z_read, _ = read_with_skrf(path)
    assert z_read[0] == pytest.approx(0.01 - 1.591549j, rel=1e-6)
    same = render_touchstone(cell, reference_ohm=1.0)
    ((_, re_1, im_1),) = data_lines(same)
    assert (re_1, im_1) == pytest.approx((0.01, -1.591549), rel=1e-6)


def test_one_ohm_against_fifty_gives_the_textbook_s11(tmp_path, make_cell):
    # Source: docs/references.md [120] [DF]: S = (Z - Z0)/(Z + Z0), Z = 1 ohm, Z0 = 50 -> -0.960784.
    cell = make_cell(response=FrequencyResponse(np.array([1e6, 1e7]), np.array([1.0, 1.0 + 0j])))
    path = tmp_path / "one_ohm.s1p"
    path.write_text(render_touchstone(cell, reference_ohm=50.0))
    _, _, network = read_with_skrf(path)
    np.testing.assert_allclose(network.s[:, 0, 0], -0.960784, rtol=1e-6)


def test_header_comments(library, deck_name):
    cell = library[0]
    corner = cell.corners[-1].corner
    text = render_touchstone(cell, corner, deck_name)
    comments = [line for line in text.splitlines() if line.startswith("!")]
    joined = " ".join(comments)
    assert cell.name in joined
    assert f"corner: {corner}" in joined
    assert f"deck: {deck_name}" in joined
    assert "estimate" in joined
    assert CAUTION in joined
    options = [line for line in text.splitlines() if line.startswith("#")]
    assert options == ["# Hz Z RI R 1"]
    # the option line comes before every data line
    lines = text.splitlines()
    assert lines.index(options[0]) < min(
        i for i, line in enumerate(lines) if line and line[0].isdigit()
    )


def test_default_corner_is_the_first(library):
    cell = library[0]
    assert render_touchstone(cell) == render_touchstone(cell, cell.corners[0].corner)


def test_newlines_in_names_cannot_break_comments(make_cell):
    cell = make_cell(name="two\nlines")
    text = render_touchstone(cell)
    assert all(line.startswith(("!", "#")) or line[0].isdigit() for line in text.splitlines())


@pytest.mark.parametrize(
    ("freq", "z"),
    [
        ([1e6, 1e6], [1.0, 1.0]),
        ([2e6, 1e6], [1.0, 1.0]),
        ([1e6, 2e6], [1.0, np.nan]),
        ([1e6, 2e6], [1.0, np.inf]),
        ([], []),
    ],
)
def test_unwritable_responses_are_refused(make_cell, freq, z):
    cell = make_cell(response=FrequencyResponse(np.array(freq, float), np.array(z, complex)))
    with pytest.raises(ValueError):
        render_touchstone(cell)


def test_bad_reference_is_refused(library):
    with pytest.raises(ValueError, match="reference_ohm"):
        render_touchstone(library[0], reference_ohm=0.0)


def test_unknown_corner(library):
    with pytest.raises(KeyError):
        render_touchstone(library[0], "no_such_corner")


@settings(
    max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    re_part=st.floats(1e-6, 1e6),
    im_part=st.floats(-1e7, 1e7),
    reference=st.sampled_from([1.0, 50.0, 0.1]),
)
def test_any_impedance_round_trips(tmp_path, make_cell, re_part, im_part, reference):
    # Source: scikit-rf Touchstone reader; rel 1e-7 on the complex Z (its Z -> S -> Z
    # conversion costs about |Z|/R x 1e-16, here up to 1e8 x 1e-16).
    z = np.array([re_part + 1j * im_part, 2 * re_part - 1j * im_part])
    cell = make_cell(response=FrequencyResponse(np.array([1e3, 1e9]), z))
    path = tmp_path / "h.s1p"
    path.write_text(render_touchstone(cell, reference_ohm=reference))
    _, z_read, _ = read_with_skrf(path)
    assert np.all(np.abs(z_read - z) <= 1e-7 * np.abs(z))

"""First-order temperature law of resistances, against ngspice's resistor temperature model."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from celllab.physics.resistance import linear_tcr_factor
from celllab.units import to_si

from .ngspice_util import run_deck


@pytest.mark.parametrize(("ohm", "ppm_per_K", "temperature_C", "tnom_C"), [
    (100.0, 3300.0, 125.0, 25.0),
    (12.0, 1500.0, -40.0, 25.0),
    (8.0, -400.0, 150.0, 27.0),
    (0.07, 3900.0, 85.0, 0.0),
])
def test_factor_matches_ngspice_tc1(tmp_path: Path, ohm: float, ppm_per_K: float, temperature_C: float,
                                    tnom_C: float) -> None:
    # Source: ngspice resistor with a first-order coefficient tc1 at .temp against .options tnom
    # (docs/references.md [130], [140]); rel 1e-5 (ngspice prints 7 significant digits)
    alpha = to_si(ppm_per_K, "ppm/K")
    deck = "\n".join([
        "first-order TCR", "V1 1 0 1", f"R1 1 0 {ohm!r} tc1={alpha!r}", f".options tnom={tnom_C!r}",
        f".temp {temperature_C!r}", ".op", ".control", "run", "print -1/v1#branch", ".endc", ".end", ""])
    out = run_deck(deck, tmp_path)
    spice_ohm = float(re.search(r"-1/v1#branch\s*=\s*(\S+)", out).group(1))
    ours = ohm * linear_tcr_factor(alpha, to_si(temperature_C, "degC"), to_si(tnom_C, "degC"))
    assert ours == pytest.approx(spice_ohm, rel=1e-5)


def test_factor_is_one_at_the_reference_and_broadcasts() -> None:
    import numpy as np

    t = to_si(np.array([[25.0, 125.0]]), "degC")
    f = linear_tcr_factor(np.array([[1e-3], [2e-3]]), t, to_si(25.0, "degC"))
    # 1 + alpha x 100 K (definition)
    assert f.shape == (2, 2)
    assert f == pytest.approx(np.array([[1.0, 1.1], [1.0, 1.2]]), rel=1e-12)

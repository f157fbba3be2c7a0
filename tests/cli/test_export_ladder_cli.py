"""``celllab export spice --ladder-accuracy-percent``: accepted, and clear errors when out of range."""

from __future__ import annotations

import pytest

from .test_export_cli import DECK, catalog_path, export  # noqa: F401  (fixture)


def test_accuracy_is_accepted(catalog_path, tmp_path):  # noqa: F811
    # ladder lengths against the accuracy are checked in tests/export/test_spice_accuracy.py
    out = tmp_path / "fine.lib"
    assert export(catalog_path, "spice", "--deck", DECK, "--out", str(out),
                  "--ladder-accuracy-percent", "0.05") == 0
    assert ".subckt" in out.read_text()


@pytest.mark.parametrize("value", ["0", "-1", "100"])
def test_bad_accuracy_exits_2(catalog_path, capsys, value):  # noqa: F811
    assert export(catalog_path, "spice", "--ladder-accuracy-percent", value) == 2
    err = capsys.readouterr().err
    assert "--ladder-accuracy-percent" in err and "Traceback" not in err

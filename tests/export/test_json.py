"""JSON export: validated against its generated schema by the jsonschema package."""

from __future__ import annotations

import copy
import json
import math

import jsonschema
import numpy as np
import pytest

from celllab.export import CAUTION
from celllab.export.json import render_json, write_json
from celllab.export.schema import export_json_schema, write_json_schema
from celllab.records import METRIC_NAMES, METRICS


@pytest.fixture(scope="module")
def validator():
    # Source: JSON Schema Draft 2020-12 as implemented by the jsonschema package.
    schema = export_json_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


@pytest.fixture
def document(library, deck_name):
    return json.loads(render_json(library, deck_name))


def test_schema_declares_draft_2020_12_and_units():
    schema = export_json_schema()
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    metrics = schema["$defs"]["MetricsExport"]
    assert set(metrics["required"]) == set(METRIC_NAMES)
    assert metrics["additionalProperties"] is False
    for info in METRICS:
        assert f"[{info.unit}]" in metrics["properties"][info.name]["description"]
    assert CAUTION in schema["description"]


def test_export_validates(validator, document):
    errors = list(validator.iter_errors(document))
    assert errors == []


def test_metrics_only_export_validates(validator, library, deck_name):
    document = json.loads(render_json(library, deck_name, include_curves=False, indent=None))
    assert list(validator.iter_errors(document)) == []
    assert all(c["response"] is None for cell in document["cells"] for c in cell["corners"])


def _set(doc, path, value):
    target = doc
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value


def _delete(doc, path):
    target = doc
    for key in path[:-1]:
        target = target[key]
    del target[path[-1]]


@pytest.mark.parametrize(
    ("path", "value"),
    [
        (("cells", 0, "corners", 0, "metrics", "cap_fF"), "lots"),
        (("cells", 0, "topology"), "nmos_inv"),
        (("cells", 0, "oxide"), "medium"),
        (("cells", 0, "width_sites"), 2.5),
        (("cells", 0, "esd_safe"), "yes"),
        (("cells", 0, "corners"), []),
        (("cells", 0, "corners", 0, "response", "freq_Hz"), "1e9"),
        (("cells", 0, "corners", 0, "metrics", "unknown_metric"), 1.0),
        (("format_version",), 2),
        (("format",), "other"),
    ],
)
def test_corrupted_documents_fail(validator, document, path, value):
    broken = copy.deepcopy(document)
    _set(broken, path, value)
    assert not validator.is_valid(broken)


@pytest.mark.parametrize(
    "path",
    [
        ("cells", 0, "corners", 0, "metrics", "esr_ohm"),
        ("cells", 0, "name"),
        ("caution",),
        ("cells", 0, "corners", 0, "flags"),
    ],
)
def test_missing_fields_fail(validator, document, path):
    broken = copy.deepcopy(document)
    _delete(broken, path)
    assert not validator.is_valid(broken)


def test_values_read_back_exactly(document, library, deck_name):
    # Source: json module round trip of shortest-repr floats; exact equality.
    assert document["deck"] == deck_name
    assert document["caution"] == CAUTION
    for cell, exported in zip(library, document["cells"], strict=True):
        assert exported["name"] == cell.name
        assert exported["area_um2"] == cell.area_um2
        for result, corner in zip(cell.corners, exported["corners"], strict=True):
            for name in METRIC_NAMES:
                value = result.metrics[name]
                if math.isfinite(value):
                    assert corner["metrics"][name] == value
                else:
                    assert corner["metrics"][name] is None
            z = np.array(corner["response"]["z_real_ohm"]) + 1j * np.array(
                corner["response"]["z_imag_ohm"]
            )
            np.testing.assert_array_equal(z, result.response.z_ohm)
            np.testing.assert_array_equal(corner["response"]["freq_Hz"], result.response.freq_Hz)
            if result.cv is not None:
                np.testing.assert_array_equal(corner["cv"]["cap_F"], result.cv.cap_F)


def test_json_is_strict(library, deck_name):
    # Source: RFC 8259 has no NaN/Infinity; a strict parser must accept the export.
    def refuse(token):
        raise ValueError(token)

    json.loads(render_json(library, deck_name), parse_constant=refuse)


def test_each_corner_carries_its_circuit(document, library):
    for cell, exported in zip(library, document["cells"], strict=True):
        for corner in exported["corners"]:
            netlist = cell.netlist[corner["corner"]]
            circuit = corner["circuit"]
            names = [e["name"] for e in circuit]
            assert names == [el.name for el in netlist.elements]
            assert len(set(names)) == len(names)
            assert {"vdd", "vss"} <= {n for e in circuit for n in e["nodes"]}
            for element, el in zip(circuit, netlist.elements, strict=True):
                first = "l_H" if el.kind == "L" else "c_F" if el.kind == "C" else "r_ohm"
                assert element["values"][first] == float(el.value)


def test_no_stored_circuit_gives_null(validator, make_cell, deck_name):
    cell = make_cell("mom")
    cell.netlist = None
    document = json.loads(render_json([cell], deck_name))
    assert validator.is_valid(document)
    assert all(c["circuit"] is None for c in document["cells"][0]["corners"])


def test_writers(tmp_path, validator, library, deck_name):
    out = write_json(tmp_path / "cells.json", library, deck_name)
    assert validator.is_valid(json.loads(out.read_text(encoding="utf-8")))
    schema_path = write_json_schema(tmp_path / "cells.schema.json")
    assert json.loads(schema_path.read_text(encoding="utf-8")) == export_json_schema()

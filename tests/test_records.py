"""The typed results of a run: frozen records, one ``to_dict()`` for summary.json, JSON without NaN."""

import dataclasses
import json
import math

import numpy as np
import pytest

from topoedge.outputs.report import format_summary
from topoedge.scenario import parse_scenario
from topoedge.util.jsonio import dumps, plain_json
from topoedge.workflows import RunSummary, run_scenario
from topoedge.workflows.sweep import quantities_of

# Flux 1/10 without spin, E_F in the gap above the lowest Landau level, a
# hard-wall ribbon: C = 1 (TKNN t_1 = 1), one mode per edge.
SCENARIO = {"lattice": {"flux": "1/10"}, "spin": {"enabled": False}, "ribbon": {"width": 40,
            "edge": {"profile": "none"}}, "fermi": {"gap": 1}, "spectrum": {"k_points": 21},
            "chern": {"refine": False}}


@pytest.fixture(scope="module")
def summary() -> RunSummary:
    return run_scenario(parse_scenario(SCENARIO)).summary


def test_records_are_frozen(summary):
    for record in (summary, summary.model, summary.bulk, summary.fermi, summary.hall, summary.hall.routes,
                   summary.check, summary.edges):
        field = dataclasses.fields(record)[0].name
        with pytest.raises(dataclasses.FrozenInstanceError):
            setattr(record, field, None)


def test_attributes_and_the_dictionary_say_the_same(summary):
    d = summary.to_dict()
    assert summary.bulk.chern_below_fermi == d["bulk"]["chern_below_fermi"] == 1
    assert summary.hall.sigma_xy == d["hall"]["sigma_xy"] == 1
    assert summary.hall.r_xy_ohm == d["hall"]["r_xy_ohm"]
    assert summary.hall.routes.edge == d["hall"]["routes"]["edge"] == 1
    assert summary.check.routes_agree is d["check"]["routes_agree"] is True
    assert summary.check.bulk_edge_agree is d["check"]["bulk_edge_agree"] is True
    assert (summary.edges.bottom.net, summary.edges.top.net) == (d["edges"]["bottom"]["net"],
                                                                d["edges"]["top"]["net"]) == (1, -1)
    assert summary.fermi.gap_window == tuple(d["fermi"]["gap_window"])
    assert summary.model.magnetic_length_a == d["model"]["magnetic_length_a"]
    assert summary.spectrum.k_points == d["spectrum"]["k_points"] == 21
    assert d["config"] == summary.config.to_dict()
    # The table row of a sweep is read from the attributes.
    row = quantities_of(summary)
    assert (row["chern"], row["bottom_net"], row["top_net"], row["bulk_edge_agree"]) == (1, 1, -1, True)
    assert "C = 1" in format_summary(summary)


def test_summary_json_is_the_records_dictionary(summary):
    # Strict JSON (RFC 8259 has no NaN or Infinity): the written text parses
    # back to to_dict() exactly when every number is finite.
    text = dumps(summary, indent=2)
    assert json.loads(text) == json.loads(json.dumps(summary.to_dict(), allow_nan=False))


def test_nan_and_infinity_become_null():
    value = {"a": float("nan"), "b": [np.float64(np.inf), 1.5, np.int64(3)], "c": (np.float32(-np.inf),),
             "d": np.array([1.0, np.nan])}
    assert plain_json(value) == {"a": None, "b": [None, 1.5, 3], "c": [None], "d": [1.0, None]}
    text = dumps(value)
    assert "NaN" not in text and "Infinity" not in text
    assert json.loads(text)["b"] == [None, 1.5, 3]
    assert not any(isinstance(x, float) and not math.isfinite(x) for x in plain_json(value)["b"])

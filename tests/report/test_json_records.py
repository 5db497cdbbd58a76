"""The JSON report's fast record builders give what the records' own ``to_json`` gives
(written by the json module of the standard library, the reference here)."""

from __future__ import annotations

import json

import orjson
import pytest

from tauscan.analysis.result import capacitor_records, node_records
from tauscan.pipeline import ScanRequest, scan
from tests.conftest import SAMPLES


@pytest.mark.parametrize("name", sorted(p.name for p in SAMPLES.glob("*.sp")))
def test_fast_records_equal_to_json(name):
    run = scan(ScanRequest(str(SAMPLES / name)))
    a, waived = run.analysis, run.lint.waived
    fast = orjson.loads(orjson.dumps({"c": capacitor_records(a.capacitors, waived), "n": node_records(a.nodes)},
                                     option=orjson.OPT_SERIALIZE_NUMPY))
    slow = json.loads(json.dumps({"c": [c.to_json(waived.get(c.name)) for c in a.capacitors],
                                  "n": [n.to_json() for n in a.nodes]}))
    assert fast == slow
    if name == "two_stage_amp.sp":
        assert any(c["waived"] for c in fast["c"])  # the waiver column is exercised too


def test_non_finite_numbers_are_null():
    # a capacitor across an ideal source's nodes sees no resistance: its figures are not finite
    from tauscan.analysis.result import CapacitorResult

    c = CapacitorResult("c1", "a", "0", 1e-12, "grounded", None, None, float("inf"), None, float("nan"), 0.0, 0.0,
                        0.0, 0.0, 0.0, None, None, None, "f.sp", 3)
    assert orjson.loads(orjson.dumps(capacitor_records([c], {})))[0] == json.loads(json.dumps(c.to_json()))

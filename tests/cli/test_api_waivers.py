"""The Python API's capacitor frame shows each capacitor's waiver, as JSON and CSV do."""

from __future__ import annotations

import json

from tauscan import api
from tests.conftest import SAMPLES, run_cli


def test_capacitor_frame_shows_the_waivers_as_json_does():
    path = str(SAMPLES / "two_stage_amp.sp")
    result = api.scan(path, probe="out")
    frame = result.capacitors_frame()
    report = json.loads(run_cli("scan", path, "--probe", "out", "--format", "json").stdout)
    from_json = {c["name"]: c.get("waived") for c in report["capacitors"]}
    from_frame = dict(zip(frame["name"], frame["waived"]))
    assert any(from_json.values())  # the sample waives its compensation capacitor inline
    def reason(v):  # pandas holds a missing reason as NaN
        return v if isinstance(v, str) and v else None

    assert {k: reason(v) for k, v in from_frame.items()} == {k: reason(v) for k, v in from_json.items()}
    assert result.waived and set(result.waived) <= set(frame["name"])
    # the figures still read as before, from the result itself
    assert result.f3db_hz == report["summary"]["f3db_hz"]

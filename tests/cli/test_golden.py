"""Golden file of the terminal table for a sample.  Regenerate after a deliberate change
of layout with TAUSCAN_REGENERATE=1 and review the difference."""

import os

from tauscan.pipeline import ScanRequest, scan
from tauscan.report import scan_table
from tests.conftest import ROOT

GOLDEN = ROOT / "tests" / "golden" / "sensor_readout.txt"


def test_table_matches_the_golden_file(monkeypatch):
    monkeypatch.chdir(ROOT)
    run = scan(ScanRequest("samples/sensor_readout.sp", probe="samp"))
    text = scan_table.render([run], top=8, width=150)
    if os.environ.get("TAUSCAN_REGENERATE"):
        GOLDEN.write_text(text)
    expected = GOLDEN.read_text()
    assert text == expected, "table layout changed; diff against tests/golden/sensor_readout.txt"

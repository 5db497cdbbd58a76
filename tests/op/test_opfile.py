"""User-supplied operating points (--op): values override the models; unknown names are errors."""

import json

import pytest
from numpy.testing import assert_allclose

from tauscan.errors import SettingsError
from tauscan.op import operating_point
from tauscan.reader import read_netlist
from tests.conftest import run_cli

NET = "t\nVdd vdd 0 1.8\nVg g 0 0.8\nRd vdd d 10k\nM1 d g 0 0 mn w=10u l=1u\n.model mn nmos (vto=0.5 kp=100u)\n"


def test_json_device_values_override_the_model(write, tmp_path):
    op_file = tmp_path / "op.json"
    op_file.write_text(json.dumps({"devices": {"M1": {"gm": "1.5m", "gds": 2e-5, "cgd": "3f"}}}))
    op = operating_point(read_netlist(write(NET)), op_file=str(op_file))
    m = op.device("m1")
    assert m.values["gm"] == 1.5e-3 and m.values["gds"] == 2e-5 and m.caps["cgd"] == 3e-15
    assert m.overridden == {"gm", "gds", "cgd"}


def test_csv_node_voltages_pin_the_solution(write, tmp_path):
    op_file = tmp_path / "op.csv"
    op_file.write_text("name,quantity,value\nd,v,1.2\nm1,cgs,10f\n")
    op = operating_point(read_netlist(write(NET)), op_file=str(op_file))
    assert_allclose(op.voltage("d"), 1.2)
    assert op.source == "file"
    assert op.device("m1").caps["cgs"] == 10e-15


@pytest.mark.parametrize(
    "content, name, message",
    [
        ('{"nodes": {"nosuch": 1}}', "op.json", "node 'nosuch' is not in the circuit"),
        ('{"devices": {"m9": {"gm": 1}}}', "op.json", "device 'm9'"),
        ('{"devices": {"m1": {"beta": 1}}}', "op.json", "unknown quantity 'beta'"),
        ('{"devices": {"m1": {"gm": "fast"}}}', "op.json", "not a number"),
        ("{not json", "op.json", "not valid JSON"),
        ("node,volts\n", "op.csv", "header"),
        ("name,quantity,value\nd,v\n", "op.csv", "3 columns"),
    ],
)
def test_bad_op_files(write, tmp_path, content, name, message):
    op_file = tmp_path / name
    op_file.write_text(content)
    with pytest.raises(SettingsError, match=message) as info:
        operating_point(read_netlist(write(NET)), op_file=str(op_file))
    assert info.value.file == str(op_file) and info.value.line is not None


def test_op_command_json_contract(write):
    path = write(NET + "Q1 vdd g e qn\nRe e 0 10k\nD1 e 0 dm\n.model qn npn (is=1e-16 bf=100)\n.model dm d (is=1e-14 cjo=1p)\n")
    result = run_cli("op", path, "--format", "json")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    assert set(data["nodes"]) == {"vdd", "g", "d", "e"}
    by_name = {d["name"]: d for d in data["devices"]}
    m, q, d = by_name["m1"], by_name["q1"], by_name["d1"]
    assert m["type"] == "nmos" and m["model"] == "mn" and m["region"] == "saturation"
    assert set(m["caps"]) == {"cgs", "cgd", "cgb", "cbd", "cbs"}
    assert {"id", "gm", "gds", "gmb"} <= set(m)
    assert q["type"] == "npn" and {"gpi", "go", "gm"} <= set(q) and set(q["caps"]) == {"cbe", "cbc", "ccs"}
    assert d["type"] == "diode" and set(d["caps"]) == {"cj"}


def test_op_command_table_and_bad_op_file(write, tmp_path):
    path = write(NET)
    result = run_cli("op", path)
    assert result.returncode == 0 and "Node voltages" in result.stdout and "saturation" in result.stdout
    bad = tmp_path / "bad.json"
    bad.write_text('{"devices": {"mx": {"gm": 1}}}')
    result = run_cli("op", path, "--op", str(bad))
    assert result.returncode == 2 and "Traceback" not in result.stderr
    assert result.stderr.startswith(f"{bad}:1:")

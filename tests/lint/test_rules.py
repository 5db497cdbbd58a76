"""Each lint rule on circuits built in Python (tests/lint/harness.py), one that triggers it
and one that does not.

The circuits are textbook stages whose figures follow from closed forms: a common-source
stage with a bridging capacitor has the Miller factor 1 + gm Rd (Miller 1920; Gray, Hurst,
Lewis and Meyer 2009, ch. 7), here 1 + 4 mS * 10 kOhm = 41.
"""

from numpy.testing import assert_allclose

from tauscan.lint.settings import LintSettings
from tests.lint.harness import build, lint, rules_of


def stage(cgd: float = 20e-15, rd: float = 10e3, comment: str = "") -> list[tuple]:
    """Vin -> 50k -> gate; a 4 mS transconductor into Rd; Cgd bridging, Cgs and Cd to ground."""
    return [
        ("vin", "v", ("src", "0"), 0.0, {"ac": 1.0}),
        ("rs", "r", ("src", "g"), 50e3),
        ("gm", "g", ("d", "0", "g", "0"), 4e-3),
        ("rd", "r", ("d", "0"), rd),
        ("cgd", "c", ("g", "d"), cgd, {"comment": comment}),
        ("cgs", "c", ("g", "0"), 10e-15),
        ("cd", "c", ("d", "0"), 5e-15),
    ]


def test_miller_node_on_a_bridged_gain_stage():
    result = lint(build("cs", stage()))
    assert rules_of(result) == ["miller-node"]
    finding = result.findings[0]
    assert finding.subject == "g" and finding.line == 5 and finding.severity == "warning"


def test_no_miller_node_when_the_bridging_capacitor_is_small():
    assert rules_of(lint(build("cs", stage(cgd=0.1e-15)))) == []


def test_an_inline_waiver_silences_the_node_and_is_listed():
    result = lint(build("cs", stage(comment="tauscan-waive: compensation, Miller by design")))
    assert rules_of(result) == []
    assert result.waived == {"cgd": "compensation, Miller by design"}


def test_bandwidth_floor_fires_below_the_floor_only():
    # open-circuit sum: Rs (Cgs + 41 Cgd) + Rd (Cgd + Cd) = 50k * 830f + 10k * 25f = 41.75 ns
    # (Razavi 2017, ch. 6: b1 of the common-source stage), so the -3 dB is near 3.8 MHz
    low = lint(build("cs", stage()), LintSettings(min_bandwidth=100e6, severity={"miller-node": "note"}))
    assert "bandwidth-floor" in rules_of(low)
    floor = next(f for f in low.findings if f.rule == "bandwidth-floor")
    assert floor.severity == "error"
    high = lint(build("cs", stage()), LintSettings(min_bandwidth=1e3))
    assert "bandwidth-floor" not in rules_of(high)


def test_regenerative_capacitor_across_a_non_inverting_gain():
    # a follower-like stage with gain +2 across a capacitor: the input sees C (1 - 2) < 0
    circuit = build("regen", [
        ("vin", "v", ("src", "0"), 0.0, {"ac": 1.0}),
        ("rs", "r", ("src", "a"), 10e3),
        ("e1", "e", ("b", "0", "a", "0"), 2.0),
        ("cf", "c", ("a", "b"), 1e-12),
        ("ca", "c", ("a", "0"), 5e-12),
    ])
    result = lint(circuit)
    assert "regenerative-cap" in rules_of(result)
    assert "regenerative-cap" not in rules_of(lint(build("cs", stage())))


def test_a_negative_part_across_a_non_inverting_gain_is_not_regenerative():
    # the same gain of +2 across -1 pF (a negative pair of a charge-based device's split matrix):
    # the input sees C (1 - 2) = +1 pF, a positive capacitance, so the rule stays silent
    circuit = build("regen", [
        ("vin", "v", ("src", "0"), 0.0, {"ac": 1.0}),
        ("rs", "r", ("src", "a"), 10e3),
        ("e1", "e", ("b", "0", "a", "0"), 2.0),
        ("cf", "c", ("a", "b"), -1e-12),
        ("ca", "c", ("a", "0"), 5e-12),
    ])
    assert "regenerative-cap" not in rules_of(lint(circuit))


def test_the_open_circuit_sum_the_rules_see_is_the_closed_form():
    from tauscan.analysis import AnalysisSettings, analyze_network
    from tauscan.linear import linearize
    from tauscan.op import solve_dc

    op = solve_dc(build("cs", stage()))
    analysis = analyze_network(linearize(op), op, None, None, AnalysisSettings())
    # Razavi 2017, ch. 6: b1 = Rs (1 + gm Rd) Cgd + Rs Cgs + Rd (Cgd + Cd); GMIN (1e-12 S at
    # every node) shifts it by about R * GMIN = 5e-8, hence the tolerance
    assert_allclose(analysis.sum_tau_s, 50e3 * 41 * 20e-15 + 50e3 * 10e-15 + 10e3 * 25e-15, rtol=1e-6)
    assert_allclose(analysis.capacitor("cgd").factor_in, 41, rtol=1e-6)

"""tauscan: find the capacitors that limit an analog circuit's bandwidth.

The data flows one way, and the sub-packages follow it:

    reader (netlist text -> flat circuit)
      -> op (DC operating point, device models)
      -> linear (small-signal G and C)
      -> analysis (time constants, Miller gains, poles)
      -> lint / report (findings, tables, files)

The figures are first-order estimates that point at what to look at; they never
replace full simulation and sign-off.
"""

__version__ = "0.1.0"

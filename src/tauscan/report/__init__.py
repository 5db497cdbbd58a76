"""Reporters: they take the results of earlier stages and render them.

One module per format, imported only when that format is asked for.  Reporters
know no circuit theory: they print what the analysis computed.
"""

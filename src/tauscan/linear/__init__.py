"""Linearization: the operating point -> the small-signal pair (G, C) and the capacitor list."""

from tauscan.linear.smallsignal import CapacitorRecord, SmallSignalNetwork, linearize

__all__ = ["CapacitorRecord", "SmallSignalNetwork", "linearize"]

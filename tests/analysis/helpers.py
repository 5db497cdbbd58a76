"""Shared helpers for the analysis tests."""

from tauscan import api
from tauscan.analysis import AnalysisSettings


def scan_text(write, text, **kw):
    settings = kw.pop("settings", None) or AnalysisSettings()
    return api.scan(write(text), settings=settings, **kw)

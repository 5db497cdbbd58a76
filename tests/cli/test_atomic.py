"""Reports are written atomically: an interrupted write leaves no partial file and the old
report intact."""

import os

import pytest

from tauscan.report import output


def test_interrupted_write_leaves_the_old_file(tmp_path, monkeypatch):
    target = tmp_path / "report.json"
    target.write_text("old report")

    def broken_replace(src, dst):
        raise KeyboardInterrupt  # the run is interrupted just before the rename

    monkeypatch.setattr(output.os, "replace", broken_replace)
    with pytest.raises(KeyboardInterrupt):
        output.write_text("new report " * 1000, str(target))
    assert target.read_text() == "old report"
    assert os.listdir(tmp_path) == ["report.json"]  # no temporary file left behind


def test_failed_write_midway(tmp_path, monkeypatch):
    target = tmp_path / "out.csv"
    real_fdopen = os.fdopen

    class Failing:
        def __init__(self, handle):
            self.handle = handle

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.handle.close()

        def write(self, data):
            self.handle.write(data[:10])
            raise OSError(28, "No space left on device")

    monkeypatch.setattr(output.os, "fdopen", lambda fd, mode: Failing(real_fdopen(fd, mode)))
    with pytest.raises(OSError):
        output.write_bytes(b"x" * 1000, str(target))
    assert not target.exists() and os.listdir(tmp_path) == []


def test_write_creates_the_file(tmp_path):
    target = tmp_path / "a.txt"
    output.write_text("hello", str(target))
    assert target.read_text() == "hello"


def test_report_permissions_follow_the_umask(tmp_path):
    target = tmp_path / "b.txt"
    old = os.umask(0o022)
    try:
        output.write_text("x", str(target))
    finally:
        os.umask(old)
    assert (target.stat().st_mode & 0o777) == 0o644

"""Where a report goes: standard output, or a file written atomically.

A file is written to a temporary file in the same folder and renamed into
place, so an interrupted run never leaves a half-written report, and an
existing report is replaced only by a complete one.
"""

from __future__ import annotations

import os
import sys
import tempfile

from tauscan.errors import SettingsError


def write_text(text: str | bytes, path: str | None, *, protect: tuple[str, ...] = ()) -> None:
    """Write ``text`` to ``path`` atomically, or to stdout when ``path`` is None or '-'.
    ``text`` may be UTF-8 bytes already (the JSON report of a large netlist: hundreds of MB,
    never copied into a str).

    ``protect`` lists input files (the netlists) that must never be overwritten.
    """
    if isinstance(text, bytes):
        if path is None or path == "-":
            sys.stdout.flush()
            sys.stdout.buffer.write(text if text.endswith(b"\n") or not text else text + b"\n")
            sys.stdout.buffer.flush()
            return
        write_bytes(text, path, protect=protect)
        return
    if path is None or path == "-":
        sys.stdout.write(text)
        if text and not text.endswith("\n"):
            sys.stdout.write("\n")
        sys.stdout.flush()
        return
    write_bytes(text.encode("utf-8"), path, protect=protect)


def write_bytes(data: bytes, path: str, *, protect: tuple[str, ...] = ()) -> None:
    target = os.path.abspath(path)
    for item in protect:
        if os.path.exists(target) and os.path.exists(item) and os.path.samefile(target, item):
            raise SettingsError(f"refusing to write the report over the input netlist {item}")
    folder = os.path.dirname(target) or "."
    if not os.path.isdir(folder):
        raise SettingsError(f"cannot write {path}: folder {folder} does not exist")
    try:
        fd, tmp = tempfile.mkstemp(prefix=".tauscan-", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise SettingsError(f"cannot write {path}: {exc.strerror}") from None
    try:
        # mkstemp makes the file private (0600); a report gets the usual permissions,
        # or those of the report it replaces
        if os.path.exists(target):
            mode = os.stat(target).st_mode & 0o777
        else:
            umask = os.umask(0)
            os.umask(umask)
            mode = 0o666 & ~umask
        os.chmod(tmp, mode)
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise

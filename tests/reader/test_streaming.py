"""The file is read a chunk at a time: the same lines and errors as reading it whole, at any
chunk size, and never the whole text in memory."""

import tracemalloc

import pytest

from tauscan.errors import NetlistSyntaxError
from tauscan.reader import lines as lines_mod
from tauscan.reader import read_netlist

TEXT = ("\ufefftitle \u00b5 line\r\n* comment with \u00e9\u00e8 and \u03a9\r\nR1 a b 1k ; \u00b5\r\n"
        "C1 b 0 2p\n+ \n\nM1 d g 0 0 nch w=1u\n+ l=0.2u\n.model nch nmos (vto=0.4)\nV1 a 0 1\n")


@pytest.mark.parametrize("chunk", [1, 2, 3, 7, 64, 1 << 20])
def test_any_chunk_size_gives_the_same_lines(tmp_path, monkeypatch, chunk):
    path = tmp_path / "n.sp"
    path.write_bytes(TEXT.encode("utf-8"))
    whole = TEXT.lstrip("\ufeff").splitlines()
    monkeypatch.setattr(lines_mod, "CHUNK_BYTES", chunk)
    assert list(lines_mod.read_lines(str(path))) == whole
    circuit = read_netlist(str(path))
    assert [e.name for e in circuit.elements] == ["r1", "c1", "m1", "v1"]
    assert circuit.title == "title \u00b5 line"


@pytest.mark.parametrize("chunk", [5, 1 << 20])
def test_errors_are_located_in_later_chunks(tmp_path, monkeypatch, chunk):
    monkeypatch.setattr(lines_mod, "CHUNK_BYTES", chunk)
    bad = tmp_path / "bad.sp"
    bad.write_bytes(b"t\nR1 a b 1k\nR2 a b 1k\nC1 a \xe9x 0 1p\n")
    with pytest.raises(NetlistSyntaxError) as info:
        list(lines_mod.read_lines(str(bad)))
    assert (info.value.line, info.value.col) == (4, 6)
    nul = tmp_path / "nul.sp"
    nul.write_bytes(b"t\nR1 a b 1k\nR2 a b 1k\nR3 a\x00 b 1\n")
    with pytest.raises(NetlistSyntaxError) as info:
        list(lines_mod.read_lines(str(nul)))
    assert info.value.line == 4


def test_reading_never_holds_the_whole_text(tmp_path, monkeypatch):
    monkeypatch.setattr(lines_mod, "CHUNK_BYTES", 1 << 20)
    path = tmp_path / "big.sp"
    line = "Rwire_segment_0000 node_aaaaaaaa node_bbbbbbbb 12.5\n"
    with open(path, "w") as handle:
        handle.write("title\n")
        for _ in range(400_000):  # about 21 MB
            handle.write(line)
    size = path.stat().st_size
    tracemalloc.start()
    try:
        count = sum(1 for _ in lines_mod.read_lines(str(path)))
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert count == 400_001
    # a chunk in bytes, its text and its list of lines: a few chunks, far below the file
    assert peak < 8 * (1 << 20) < size / 2


def test_progress_hears_every_chunk(tmp_path, monkeypatch):
    monkeypatch.setattr(lines_mod, "CHUNK_BYTES", 1000)
    path = tmp_path / "p.sp"
    path.write_text("title\n" + "".join(f"R{k} a{k} b{k} 1k\n" for k in range(2000)))
    heard = []
    circuit = read_netlist(str(path), progress=lambda done, total: heard.append((done, total)))
    assert len(circuit.elements) == 2000
    size = path.stat().st_size
    assert len(heard) >= size // 1000 - 1
    assert all(total == size for _, total in heard)
    assert [d for d, _ in heard] == sorted(d for d, _ in heard) and heard[-1][0] == size


@pytest.mark.parametrize("chunk", [3, 16, 1 << 20])
def test_cr_only_line_ends_keep_their_line_numbers(tmp_path, monkeypatch, chunk):
    monkeypatch.setattr(lines_mod, "CHUNK_BYTES", chunk)
    path = tmp_path / "mac.sp"
    path.write_bytes(b"old line ends\rR1 a b 1k\rR2 b 0 2k\rC1 b 0 {nowhere}\r")
    assert list(lines_mod.read_lines(str(path))) == ["old line ends", "R1 a b 1k", "R2 b 0 2k", "C1 b 0 {nowhere}"]
    from tauscan.errors import TauscanError

    with pytest.raises(TauscanError) as info:
        read_netlist(str(path))
    assert info.value.line == 4


PLAIN = ("line ends\nR1 a b 1k\nC1 b 0 2p\nM1 d g 0 0 nch w=1u\nR2 b 0 2k\n.model nch nmos (vto=0.4)\n"
         "C2 d 0 1p\nR3 d 0 {nowhere}")


@pytest.mark.parametrize("end", ["\n", "\r\n", "\r", "\x0c", "\u2028"])
@pytest.mark.parametrize("chunk", [4, 1 << 20])
@pytest.mark.parametrize("last", ["", "final"])
def test_every_kind_of_line_end_reads_the_same(tmp_path, monkeypatch, end, chunk, last):
    """Plain lines, plain MOSFET lines and cards with LF, CR LF, CR, form feed and Unicode line
    separators (which str.splitlines counts), with or without a last line end: the same
    elements, line numbers and error location."""
    monkeypatch.setattr(lines_mod, "CHUNK_BYTES", chunk)
    text = PLAIN.replace("\n", end) + (end if last else "")
    path = tmp_path / "e.sp"
    path.write_bytes(text.encode("utf-8"))
    from tauscan.errors import ExpressionError

    with pytest.raises(ExpressionError) as info:
        read_netlist(str(path))
    assert (info.value.line, info.value.col) == (8, 9)  # hand-counted: the name inside the braces
    good = tmp_path / "g.sp"
    good.write_bytes(text.replace("{nowhere}", "3k").encode("utf-8"))
    circuit = read_netlist(str(good))
    assert [(e.name, e.line) for e in circuit.elements] == [
        ("r1", 2), ("c1", 3), ("m1", 4), ("r2", 5), ("c2", 7), ("r3", 8)]
    assert circuit.elements[2].params == {"w": 1e-6}

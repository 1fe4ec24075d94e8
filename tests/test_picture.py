"""graph.png: a PNG file of the report's drawing, for slides."""

from __future__ import annotations

import struct
import zlib

import pytest

from pipeline.results.drawing import MAX_DRAWN, graph_geometry
from pipeline.results.picture import DPI, graph_png
from pipeline.results.schema import EdgeRecord

EDGES = [EdgeRecord("A", "B", "directed", "intervention"),
         EdgeRecord("B", "C", "undirected"),
         EdgeRecord("C", "$D$", "directed", "collider", conflict=True)]
NODES = ["A", "B", "C", "$D$", "E"]


def _chunks(png: bytes):
    """The chunks of a PNG file, with their CRC checked (PNG specification, ISO/IEC 15948)."""
    assert png[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG signature
    pos = 8
    while pos < len(png):
        (length,) = struct.unpack(">I", png[pos:pos + 4])
        kind, data = png[pos + 4:pos + 8], png[pos + 8:pos + 8 + length]
        (crc,) = struct.unpack(">I", png[pos + 8 + length:pos + 12 + length])
        assert zlib.crc32(kind + data) == crc
        yield kind, data
        pos += 12 + length


def test_png_is_well_formed_and_sized_from_the_layout():
    png = graph_png(NODES, EDGES)
    chunks = list(_chunks(png))
    assert chunks[0][0] == b"IHDR" and chunks[-1][0] == b"IEND"
    width, height = struct.unpack(">II", chunks[0][1][:8])
    g = graph_geometry(NODES, EDGES)
    scale = DPI / 96  # picture pixels per layout pixel
    assert (width, height) == (round(g.width * scale), round(g.height * scale))
    assert png == graph_png(NODES, EDGES)  # deterministic


def test_png_written_by_learn_and_refused_when_too_large(tmp_path):
    from pipeline.simulation import simulate
    from pipeline.workflow import learn

    simulate(nodes=5, regimes=2, samples=100, seed=1).save(tmp_path)
    learn(tmp_path / "data.csv", tmp_path / "regimes.csv", out=tmp_path / "out", picture=True)
    assert (tmp_path / "out" / "graph.png").read_bytes()[:4] == b"\x89PNG"
    assert 'href="graph.png"' in (tmp_path / "out" / "report.html").read_text()
    learn(tmp_path / "data.csv", tmp_path / "regimes.csv", out=tmp_path / "plain")
    assert not (tmp_path / "plain" / "graph.png").exists()  # only on request
    assert 'href="graph.png"' not in (tmp_path / "plain" / "report.html").read_text()
    nodes = [f"V{i}" for i in range(MAX_DRAWN + 1)]
    with pytest.raises(ValueError, match="too many"):
        graph_png(nodes, [])

"""The cross-check report: well-formed HTML, self-contained, images embedded as valid PNG."""

from __future__ import annotations

import base64
import io
import struct
import zlib
from html.parser import HTMLParser

import matplotlib.image as mpimg
import pytest

from stopline.cli._common import CAUTION
from stopline.crosscheck import run_crosscheck
from stopline.report import render_report, write_report

from .test_crosscheck import small_book


class Collector(HTMLParser):
    """Collects tags, image sources, external references and text."""

    def __init__(self) -> None:
        super().__init__()
        self.open: list[str] = []
        self.images: list[str] = []
        self.external: list[str] = []
        self.text: list[str] = []
        self.tables = 0

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "img":
            self.images.append(a.get("src", ""))
        if tag == "table":
            self.tables += 1
        for key in ("src", "href"):
            if key in a and not a[key].startswith("data:"):
                self.external.append(a[key])
        if tag not in ("img", "meta", "br"):
            self.open.append(tag)

    def handle_endtag(self, tag):
        assert self.open and self.open[-1] == tag, f"</{tag}> closes <{self.open[-1:]}>"
        self.open.pop()

    def handle_data(self, data):
        self.text.append(data)


def png_chunks(data: bytes) -> list[bytes]:
    """Chunk types of a PNG after checking the signature and every CRC (PNG spec, W3C 2003)."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    pos, kinds = 8, []
    while pos < len(data):
        (length,) = struct.unpack(">I", data[pos:pos + 4])
        kind = data[pos + 4:pos + 8]
        body = data[pos + 8:pos + 8 + length]
        (crc,) = struct.unpack(">I", data[pos + 8 + length:pos + 12 + length])
        assert zlib.crc32(kind + body) == crc
        kinds.append(kind)
        pos += 12 + length
    return kinds


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("report")
    return run_crosscheck(small_book(tmp), tmp / "out", workers=1)


def test_report_parses_and_embeds_valid_pngs(run, tmp_path):
    path = write_report(run, tmp_path / "report.html")
    html = path.read_text(encoding="utf-8")
    parser = Collector()
    parser.feed(html)
    parser.close()
    assert parser.open == []  # every element closed in order
    assert parser.external == []  # self-contained
    assert len(parser.images) == 3
    for src in parser.images:
        prefix = "data:image/png;base64,"
        assert src.startswith(prefix)
        png = base64.b64decode(src[len(prefix):], validate=True)
        kinds = png_chunks(png)
        assert kinds[0] == b"IHDR" and kinds[-1] == b"IEND" and b"IDAT" in kinds
        img = mpimg.imread(io.BytesIO(png), format="png")
        assert img.ndim == 3 and img.shape[0] > 200 and img.shape[1] > 200


def test_report_content(run):
    html = render_report(run)
    parser = Collector()
    parser.feed(html)
    text = " ".join(" ".join(parser.text).split())
    assert CAUTION in text
    assert "ok 6" in text and "mismatch 1" in text and "error 1" in text
    assert "max(0.005, 0.25 vol points" in text
    assert "ACT/365 fixed" in text
    assert "Mismatches (1)" in text and "priced as European (early exercise ignored)" in text
    assert "Rows in error (1)" in text and "vol=-0.3" in text
    assert "mismatches reproduced by (a row may have several) rows priced as European 1" in text
    assert parser.tables >= 4


def test_report_escapes_cell_text(run):
    run.rows[0]["id"] = "<script>alert(1)</script>"
    try:
        html = render_report(run)
    finally:
        run.rows[0]["id"] = "OK0"
    assert "<script>" not in html and "&lt;script&gt;" in html

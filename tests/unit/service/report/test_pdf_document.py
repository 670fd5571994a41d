"""The paged PDF renderer: DejaVu from Debian or, where Debian's fonts are missing, from
matplotlib's bundled copy; every page carries the header lines and page x of y."""

from __future__ import annotations

import io

import pypdf
import pytest

from service.report import pdf_document


def _text(content: bytes) -> list[str]:
    return [" ".join(p.extract_text().split()) for p in pypdf.PdfReader(io.BytesIO(content)).pages]


def test_header_and_page_x_of_y_on_every_page():
    doc = pdf_document.PagedDocument(title="t", header_lines=["first line Ω", "second line"])
    doc.data_table(("a", "b"), [(str(i), "µ ≤ ✓ row") for i in range(150)], (30, 150))
    pages = _text(doc.finish())
    assert len(pages) >= 3
    for number, text in enumerate(pages, start=1):
        assert text.startswith("first line Ω second line")
        assert f"page {number} of {len(pages)}" in text
    assert "µ ≤ ✓ row" in pages[-1]


def test_fonts_come_from_matplotlib_when_debian_has_none(tmp_path, monkeypatch):
    monkeypatch.setattr(pdf_document, "DEBIAN_DEJAVU", tmp_path)
    directory = pdf_document.font_directory()
    assert "matplotlib" in str(directory) and (directory / "DejaVuSans.ttf").is_file()
    doc = pdf_document.PagedDocument(title="t", header_lines=["fallback ✓"])
    assert "fallback ✓" in _text(doc.finish())[0]


def test_no_fonts_anywhere_is_a_clear_error(tmp_path, monkeypatch):
    monkeypatch.setattr(pdf_document, "DEBIAN_DEJAVU", tmp_path)
    monkeypatch.setattr(pdf_document, "FONT_FILES", {"": "NoSuchFont.ttf"})
    with pytest.raises(FileNotFoundError, match="fonts-dejavu-core"):
        pdf_document.font_directory()


def test_a_lone_surrogate_prints_as_the_replacement_character():
    """A stored string with a lone surrogate (no PDF string can hold one) still prints."""
    assert pdf_document.printable("a\ud800b") == "a\ufffdb"
    assert pdf_document.printable("µ ≤ ✓ 😀") == "µ ≤ ✓ 😀"
    doc = pdf_document.PagedDocument(title="t\udfff", header_lines=["run \ud800"])
    doc.paragraph("body \udc00 text")
    pages = _text(doc.finish())
    assert "run \ufffd" in pages[0] and "body \ufffd text" in pages[0]

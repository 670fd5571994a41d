"""A paged PDF document (fpdf2) with a running header on every page: the archival record of a
run and the qualification report are both laid out with it.

Every page starts with the lines the document is identified by (for a run: its id and the case's
SHA-256) and ``page x of y``. Text is set in DejaVu (Unicode: µ, ≤, ✓, superscripts): Debian's
``fonts-dejavu-core`` where installed, otherwise the copy matplotlib (the ``service`` extra)
ships, so the renderer works on any installation of the service.
"""

from __future__ import annotations

from collections.abc import Sequence
from importlib import resources
from pathlib import Path

from fpdf import FPDF
from fpdf.enums import XPos, YPos
from fpdf.fonts import FontFace

DEBIAN_DEJAVU = Path("/usr/share/fonts/truetype/dejavu")
FONT = "DejaVuSans"
FONT_FILES = {"": "DejaVuSans.ttf", "B": "DejaVuSans-Bold.ttf"}
MONO = "DejaVuSansMono"
MONO_FILE = "DejaVuSansMono.ttf"

#: The page-count alias fpdf2 replaces when the document is finished.
PAGE_COUNT = "{nb}"

_HEADINGS = FontFace(emphasis="BOLD", fill_color=(225, 225, 225))

BODY_SIZE = 9
SMALL_SIZE = 7.5
LINE = 4.6


def printable(text: str) -> str:
    """``text`` with each lone surrogate (which no PDF string can hold) replaced by U+FFFD."""
    return text.encode("utf-16", "surrogatepass").decode("utf-16", "replace")


def font_directory() -> Path:
    """Where the DejaVu fonts are read from: Debian's, else matplotlib's bundled copy."""
    if (DEBIAN_DEJAVU / FONT_FILES[""]).is_file():
        return DEBIAN_DEJAVU
    bundled = Path(str(resources.files("matplotlib") / "mpl-data" / "fonts" / "ttf"))
    if (bundled / FONT_FILES[""]).is_file():
        return bundled
    raise FileNotFoundError("no DejaVu fonts: install Debian's fonts-dejavu-core or matplotlib")


class PagedDocument(FPDF):
    """A4 portrait, the running header on every page, Unicode text.

    ``header_lines`` identify the document on every page; the last header line also carries
    ``page x of y``. :meth:`finish` returns the PDF's bytes.
    """

    def __init__(self, *, title: str, header_lines: Sequence[str], author: str = "fluxproof"):
        super().__init__(orientation="portrait", unit="mm", format="A4")
        self.header_lines = list(header_lines)
        directory = font_directory()
        for style, name in FONT_FILES.items():
            self.add_font(FONT, style, str(directory / name))
        self.add_font(MONO, "", str(directory / MONO_FILE))
        self.set_title(printable(title))
        self.set_author(author)
        self.set_creator("fluxproof")
        self.set_margins(15, 15, 15)
        self.set_auto_page_break(auto=True, margin=15)
        self.alias_nb_pages(PAGE_COUNT)
        self.add_page()

    def normalize_text(self, text: str) -> str:
        return super().normalize_text(printable(text))

    # --- page furniture --------------------------------------------------------------------

    def header(self) -> None:
        self.set_font(FONT, "", SMALL_SIZE)
        self.set_text_color(60, 60, 60)
        page = f"page {self.page_no()} of {PAGE_COUNT}"
        for index, line in enumerate(self.header_lines):
            last = index == len(self.header_lines) - 1
            width = self.epw - (28 if last else 0)
            self.cell(width, 3.6, line, new_x=XPos.RIGHT if last else XPos.LMARGIN,
                      new_y=YPos.TOP if last else YPos.NEXT)
            if last:
                self.cell(28, 3.6, page, align="R", new_x=XPos.LMARGIN, new_y=YPos.NEXT)
        self.set_draw_color(150, 150, 150)
        self.line(self.l_margin, self.get_y() + 1, self.w - self.r_margin, self.get_y() + 1)
        self.ln(4)
        self.set_text_color(0, 0, 0)
        self.set_font(FONT, "", BODY_SIZE)

    # --- content -----------------------------------------------------------------------------

    def title_block(self, title: str, subtitle: str = "") -> None:
        self.set_font(FONT, "B", 14)
        self.multi_cell(0, 7, title, new_x=XPos.LMARGIN, new_y=YPos.NEXT)
        if subtitle:
            self.set_font(FONT, "", BODY_SIZE)
            self.multi_cell(0, LINE, subtitle, new_x=XPos.LMARGIN, new_y=YPos.NEXT)
        self.ln(2)

    def heading(self, text: str) -> None:
        if self.get_y() > self.h - 40:
            self.add_page()
        self.ln(2)
        self.set_font(FONT, "B", 11)
        self.cell(0, 6, text, new_x=XPos.LMARGIN, new_y=YPos.NEXT)
        self.set_font(FONT, "", BODY_SIZE)

    def paragraph(self, text: str, *, bold: bool = False, size: float = BODY_SIZE) -> None:
        self.set_font(FONT, "B" if bold else "", size)
        self.multi_cell(0, LINE, text, new_x=XPos.LMARGIN, new_y=YPos.NEXT)
        self.set_font(FONT, "", BODY_SIZE)

    def bullets(self, items: Sequence[str]) -> None:
        for item in items:
            self.set_x(self.l_margin)
            self.cell(5, LINE, "•")
            self.multi_cell(0, LINE, item, new_x=XPos.LMARGIN, new_y=YPos.NEXT)

    def data_table(self, headings: Sequence[str], rows: Sequence[Sequence[str]],
                   widths: Sequence[float], *, size: float = SMALL_SIZE + 0.5) -> None:
        """A table whose rows break across pages; the heading row repeats on each page."""
        self.set_font(FONT, "", size)
        with self.table(col_widths=tuple(widths), text_align="LEFT", line_height=size * 0.5,
                           first_row_as_headings=True, repeat_headings=1,
                           headings_style=_HEADINGS) as table:
            for cells in [headings, *rows]:
                row = table.row()
                for cell in cells:
                    row.cell(str(cell))
        self.set_font(FONT, "", BODY_SIZE)
        self.ln(1)

    def signature_lines(self, roles: Sequence[str]) -> None:
        """Blank lines for each signer: printed name, signature, date, role."""
        for role in roles:
            if self.get_y() > self.h - 45:
                self.add_page()
            self.ln(3)
            self.set_font(FONT, "B", BODY_SIZE)
            self.cell(0, LINE, role, new_x=XPos.LMARGIN, new_y=YPos.NEXT)
            self.set_font(FONT, "", BODY_SIZE)
            for label in ("Printed name", "Signature", "Date (UTC)"):
                self.ln(3)
                self.cell(30, LINE, label)
                y = self.get_y() + LINE
                self.line(self.get_x(), y, self.get_x() + 100, y)
                self.ln(LINE)

    def finish(self) -> bytes:
        return bytes(self.output())

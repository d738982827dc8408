"""The report and the ring as printed: headless Chromium prints them to PDF on A4 and Letter at
100 %, poppler renders the pages to PNG and lists every word with its box, and the checks
measure the paper (issue #17, "How we will know").

* Paper: ISO 216 A4 is 210 x 297 mm, US Letter 8.5 x 11 in = 215.9 x 279.4 mm; PDF user
  space is 1/72 in (ISO 32000-1:2008, 8.3.2.3), so 1 mm = 72 / 25.4 pt.
* The report's @page margins are 12 mm; nothing painted may reach the edge of that area
  (Chromium clips at it, which is how a table's right border was lost on A4).
* Text: 7 pt is the floor. A word's box from ``pdftotext -bbox`` is as tall as the font's
  ascent + descent, a fixed multiple of the font size for one font; the multiple is taken
  from a word whose size is known (the report's 15 pt title, the ring's 3 mm header).
* Scale: the ring's 100 mm check box has its centimetre digits centred on its ticks, so
  the printed distance between the centres of "0" and "10" is the printed length of 100 mm.
* No overprint: no two words' boxes overlap.

Runs where ``chromium`` and poppler (``pdftotext``, ``pdftoppm``) are installed; CI installs
them (.ci/run), and under CI=true a missing tool fails instead of skipping. Set
TRUETURN_PRINT_DIR to keep the PDFs and PNGs for a look.
"""

from __future__ import annotations

import copy
import dataclasses
import html
import math
import os
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from trueturn.dsp.coast import SweepOutcome
from trueturn.dsp.sweep import analyse_sweep
from trueturn.jobs import JobRecord
from trueturn.jobs.report import html_report
from trueturn.jobs.ring import plan_tiles, ring_svg, ring_tiles_html, strip_svg
from trueturn.jobs.store import read_document
from trueturn.jobs.sweeps import sweep_entry

DEMO_JOB = Path(__file__).parent / "data" / "demo_bench_grinder_job.yaml"
SVG = "{http://www.w3.org/2000/svg}"
PT_PER_MM = 72 / 25.4  # PDF user space is 1/72 in; 1 in = 25.4 mm
PAPER_MM = {"A4": (210.0, 297.0), "letter": (215.9, 279.4)}  # ISO 216; ANSI/ASME Y14.1
REPORT_MARGIN_MM = 12.0
MIN_PT = 7.0


def _tool(*names: str) -> str | None:
    return next((found for n in names if (found := shutil.which(n))), None)


CHROMIUM = _tool("chromium", "chromium-browser", "google-chrome", "google-chrome-stable")
PDFTOTEXT = _tool("pdftotext")
PDFTOPPM = _tool("pdftoppm")


@pytest.fixture(scope="module", autouse=True)
def tools() -> None:
    missing = [name for name, path in (("chromium", CHROMIUM), ("pdftotext", PDFTOTEXT),
                                       ("pdftoppm", PDFTOPPM)) if path is None]
    if missing:
        why = f"{', '.join(missing)} not installed (apt-get install chromium poppler-utils)"
        if os.environ.get("CI") == "true":
            pytest.fail(f"under CI the print checks must run: {why}")
        pytest.skip(why)


@dataclasses.dataclass(frozen=True)
class Word:
    text: str
    x0: float  # mm from the page's left edge
    y0: float  # mm from the page's top edge
    x1: float
    y1: float

    @property
    def height(self) -> float:
        return self.y1 - self.y0

    @property
    def centre_x(self) -> float:
        return (self.x0 + self.x1) / 2


@dataclasses.dataclass(frozen=True)
class Page:
    width_mm: float
    height_mm: float
    words: list[Word]


def keep(path: Path) -> None:
    """Copy an output to TRUETURN_PRINT_DIR when it is set (to look at the pages)."""
    where = os.environ.get("TRUETURN_PRINT_DIR")
    if where:
        Path(where).mkdir(parents=True, exist_ok=True)
        shutil.copy(path, Path(where) / path.name)


def print_pdf(source: Path, paper: str, tmp_path: Path) -> Path:
    """Print ``source`` (HTML or SVG) with headless Chromium on ``paper`` at 100 %.

    The paper is chosen as a person would in the print dialog, by a CSS ``@page { size }``
    added to a copy (the documents leave the paper to the printer); Chromium's own header
    and footer (date, file URL) are off, as a person would switch them off.
    """
    text = source.read_text(encoding="utf-8")
    assert "<style>" in text
    copy_path = tmp_path / f"{source.stem}-{paper}{source.suffix}"
    copy_path.write_text(text.replace("<style>", f"<style>@page {{ size: {paper}; }} ", 1),
                         encoding="utf-8")
    pdf = copy_path.with_suffix(".pdf")
    profile = tmp_path / f"chromium-profile-{paper}"
    assert CHROMIUM is not None
    # timeout: only a guard against a hung browser on a loaded machine, not a measurement
    done = subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu",
                           f"--user-data-dir={profile}", "--no-pdf-header-footer",
                           f"--print-to-pdf={pdf}", copy_path.as_uri()],
                          capture_output=True, text=True, timeout=600, check=False)
    assert done.returncode == 0 and pdf.exists(), done.stderr[-2000:]
    keep(pdf)
    return pdf


def pdf_pages(pdf: Path) -> list[Page]:
    """Every page's size and words (``pdftotext -bbox``: boxes in pt, origin top left)."""
    assert PDFTOTEXT is not None
    out = subprocess.run([PDFTOTEXT, "-bbox", str(pdf), "-"], capture_output=True, text=True,
                         timeout=600, check=True).stdout
    pages = []
    for m in re.finditer(r'<page width="([\d.]+)" height="([\d.]+)">(.*?)</page>', out, re.S):
        words = [Word(html.unescape(w.group(5)), *(float(w.group(i)) / PT_PER_MM
                                                   for i in range(1, 5)))
                 for w in re.finditer(r'<word xMin="([\d.]+)" yMin="([\d.]+)" xMax="([\d.]+)" '
                                      r'yMax="([\d.]+)">(.*?)</word>', m.group(3))]
        pages.append(Page(float(m.group(1)) / PT_PER_MM, float(m.group(2)) / PT_PER_MM, words))
    return pages


def page_pixels(pdf: Path, page: int, dpi: int = 100) -> tuple[int, int, bytes]:
    """Page ``page`` (from 1) rendered in grey (PGM): width, height, pixels; kept as PNG."""
    assert PDFTOPPM is not None
    stem = pdf.with_name(f"{pdf.stem}-p{page}")
    for fmt in ("-gray", "-png"):
        subprocess.run([PDFTOPPM, "-r", str(dpi), fmt, "-f", str(page), "-l", str(page),
                        "-singlefile", str(pdf), str(stem)], check=True, timeout=600)
    keep(stem.with_suffix(".png"))
    data = stem.with_suffix(".pgm").read_bytes()
    magic, size, depth, pixels = data.split(b"\n", 3)
    width, height = map(int, size.split())
    assert magic == b"P5" and depth == b"255"
    return width, height, pixels[:width * height]


def overlapping(words: list[Word]) -> list[tuple[str, str]]:
    """Pairs of words whose boxes overlap by more than 0.1 mm each way."""
    pairs = []
    for i, a in enumerate(words):
        for b in words[i + 1:]:
            if (min(a.x1, b.x1) - max(a.x0, b.x0) > 0.1
                    and min(a.y1, b.y1) - max(a.y0, b.y0) > 0.1):
                pairs.append((a.text, b.text))
    return pairs


def merged_words(svg_text: str, words: list[Word]) -> list[str]:
    """Words of the SVG's texts that the PDF does not have on their own: two texts printed
    so close that their glyphs touch come out as one word (``100110``), which a box overlap
    test cannot see."""
    wanted = Counter(token for t in ET.fromstring(svg_text.encode()).iter(f"{SVG}text")
                     for token in "".join(t.itertext()).split())
    printed = Counter(w.text for w in words)
    return sorted(token for token, n in wanted.items() if printed[token] < n)


def smallest_pt(words: list[Word], known: Word, known_pt: float) -> float:
    """The smallest font size on the page, in pt, scaled from a word of known size."""
    per_pt = known.height / known_pt
    return min(w.height for w in words) / per_pt


# --------------------------------------------------------------------------------------------
# The report


@pytest.fixture(scope="module")
def job() -> JobRecord:
    return read_document(DEMO_JOB, "job")


def imperial(job: JobRecord) -> JobRecord:
    other = copy.deepcopy(job)
    other.machine.units.mass, other.machine.units.length = "oz", "in"
    other.machine.units.vibration = "in/s"
    return other


def long_words(job: JobRecord) -> JobRecord:
    """The demo job with a very long id, machine name and an unbreakable part name."""
    other = copy.deepcopy(job)
    other.job_id = "2026-11-28-" + "a-very-long-machine-name-" * 4 + "001"
    other.machine.name = "Bench grinder " + "with a remarkably long descriptive name " * 3
    change = other.runs[1].changes[0]
    other.runs[1].changes[0] = dataclasses.replace(change, part="M6-washer-" + "X" * 90)
    return other


@pytest.mark.parametrize("paper", ["A4", "letter"])
@pytest.mark.parametrize("which", ["metric", "imperial", "long"])
def test_report_prints_whole_on_the_paper(job: JobRecord, paper: str, which: str,
                                          tmp_path: Path) -> None:
    chosen = {"metric": job, "imperial": imperial(job), "long": long_words(job)}[which]
    # the demo job: two plots, four runs, eight part changes
    check_printed_report(chosen, paper, which, tmp_path, range(2, 5))


def with_sweep(job: JobRecord) -> JobRecord:
    """The demo job with a coast-down kept after its first run: the response of a
    single-degree-of-freedom support to a rotating unbalance (S. S. Rao, Mechanical
    Vibrations, rotating unbalance, from memory) seen by an accelerometer at both pickups,
    natural speed 1000 rpm, 4 % damping, 3600 rpm down to 300 rpm."""
    other = copy.deepcopy(job)
    speeds = np.repeat(1000.0 * 0.3 * np.exp(np.arange(0.0, math.log(12.0), 0.004)), 3)
    r = speeds / 1000.0
    response = np.conj(-(speeds / 1000.0) ** 2 * r ** 2 / ((1 - r ** 2) + 2j * 0.04 * r))
    names = [p.name for p in other.machine.pickups]
    sweep = analyse_sweep(speeds, {n: response * (1 + 0.2 * k) for k, n in enumerate(names)},
                          {n: np.full(speeds.size, 1e-3) for n in names}, "g pk")
    assert sweep.resonances  # what the table is about
    other.runs[0].sweeps = [sweep_entry(SweepOutcome("coastdown", sweep, 3600.0, ()))]
    return other


@pytest.mark.parametrize("paper", ["A4", "letter"])
def test_report_with_a_sweep_prints_whole_on_the_paper(job: JobRecord, paper: str,
                                                       tmp_path: Path) -> None:
    chosen = with_sweep(job)
    text = html_report(chosen)
    assert 'id="sweeps"' in text and 'class="resonances"' in text
    check_printed_report(chosen, paper, "sweep", tmp_path, range(2, 6))


def check_printed_report(chosen: JobRecord, paper: str, which: str, tmp_path: Path,
                         page_counts: range) -> None:
    """Print the report; every page the paper's size with its footer, every word inside the
    margins, at 7 pt or more and clear of the others, nothing painted past the margins."""
    source = tmp_path / f"report-{which}.html"
    source.write_text(html_report(chosen, generated="2026-12-01T10:00:00Z"), encoding="utf-8")
    pdf = print_pdf(source, paper, tmp_path)
    pages = pdf_pages(pdf)
    width, height = PAPER_MM[paper]
    for page in pages:
        assert (page.width_mm, page.height_mm) == pytest.approx((width, height), abs=0.3)
    # page count: every page says "page n of m" with its job id, and m is the page count
    footers = [" ".join(w.text for w in p.words if w.y0 > height - REPORT_MARGIN_MM - 2)
               for p in pages]
    for n, footer in enumerate(footers, start=1):
        assert footer.endswith(f"page {n} of {len(pages)}")
        # the id, or for a very long one its start and its end (with the running number)
        assert chosen.job_id in footer or (chosen.job_id[:30] in footer
                                           and chosen.job_id[-15:] in footer)
    assert len(pages) in page_counts
    title = next(w for w in pages[0].words if w.text == "Balancing")  # the 15 pt heading
    for number, page in enumerate(pages, start=1):
        # every word inside the 12 mm margins (0.2 mm for the glyphs' side bearings)
        inside = REPORT_MARGIN_MM - 0.2
        off = [w.text for w in page.words
               if w.x0 < inside or w.x1 > width - inside or w.y0 < inside - 2]
        assert not off, (number, off)
        assert smallest_pt(page.words, title, 15.0) >= MIN_PT - 0.05, number
        assert not overlapping(page.words), number
        # nothing painted reaches the right edge of the printable area, where Chromium clips:
        # the body ends 1 mm short of it (the footer, in the margin below, is not counted)
        px_w, px_h, pixels = page_pixels(pdf, number)
        per_mm = px_w / width
        body_rows = range(int(inside * per_mm), int((height - REPORT_MARGIN_MM - 1) * per_mm))
        rightmost = _rightmost_dark(pixels, px_w, body_rows)
        assert rightmost / per_mm <= width - REPORT_MARGIN_MM - 0.4, (number, rightmost / per_mm)
        leftmost = _leftmost_dark(pixels, px_w, body_rows)
        assert leftmost / per_mm >= REPORT_MARGIN_MM - 0.3, number


def _rightmost_dark(pixels: bytes, width: int, rows: range) -> int:
    best = 0
    for y in rows:
        row = pixels[y * width:(y + 1) * width]
        for x in range(width - 1, best, -1):
            if row[x] < 235:
                best = x
                break
    return best


def _leftmost_dark(pixels: bytes, width: int, rows: range) -> int:
    best = width
    for y in rows:
        row = pixels[y * width:(y + 1) * width]
        for x in range(0, best):
            if row[x] < 235:
                best = x
                break
    return best


def test_report_plot_labels_clear_of_markers_in_chromium(job: JobRecord, tmp_path: Path) -> None:
    """Chromium's own layout (real glyph boxes): in each polar plot no run number touches a
    marker or another run number, and every plot text is at least 7 pt on paper."""
    page = html_report(job).replace("</body>", _PROBE + "</body>")
    source = tmp_path / "probe.html"
    source.write_text(page, encoding="utf-8")
    assert CHROMIUM is not None
    done = subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu",
                           f"--user-data-dir={tmp_path / 'profile'}", "--window-size=1000,1400",
                           "--dump-dom", source.as_uri()],
                          capture_output=True, text=True, timeout=600, check=False)
    found = re.search(r'<pre id="probe">(.*?)</pre>', done.stdout, re.S)
    assert found, done.stderr[-2000:]
    lines = html.unescape(found.group(1)).splitlines()
    sizes = [float(v) for line in lines if line.startswith("pt ") for v in line.split()[1:]]
    assert sizes and min(sizes) >= MIN_PT - 0.05
    clashes = [line for line in lines if line.startswith("clash")]
    assert not clashes
    assert any(line.startswith("labels ") and int(line.split()[1]) >= 4 for line in lines)
    assert sum(int(line.split()[1]) for line in lines if line.startswith("parts ")) == len(
        job.parts_on_rotor())


_PROBE = """<pre id="probe"></pre><script>
const out = [];
for (const svg of document.querySelectorAll('svg.polar, svg.plane')) {
  const sizes = [];
  for (const t of svg.querySelectorAll('text')) {
    const px = parseFloat(getComputedStyle(t).fontSize) * t.getScreenCTM().a;
    sizes.push((px * 0.75).toFixed(2));  // 1 CSS px = 0.75 pt (CSS Values 4, absolute units)
  }
  out.push('pt ' + sizes.join(' '));
  const labels = [...svg.querySelectorAll('text.label')].map(t => t.getBoundingClientRect());
  const marks = [...svg.querySelectorAll('.marker')].map(m => m.getBoundingClientRect());
  const hit = (a, b) => a.left < b.right && b.left < a.right && a.top < b.bottom && b.top < a.bottom;
  labels.forEach((a, i) => {
    marks.forEach((m, j) => { if (hit(a, m)) out.push('clash label ' + i + ' marker ' + j); });
    labels.forEach((b, j) => { if (j > i && hit(a, b)) out.push('clash label ' + i + ' label ' + j); });
  });
  if (svg.classList.contains('polar')) out.push('labels ' + labels.length);
  if (svg.classList.contains('plane')) {  // position numbers clear of the parts drawn on the rim
    const parts = [...svg.querySelectorAll('.part')].map(m => m.getBoundingClientRect());
    [...svg.querySelectorAll('text')].map(t => t.getBoundingClientRect()).forEach((a, i) => {
      parts.forEach((m, j) => { if (hit(a, m)) out.push('clash plane text ' + i + ' part ' + j); });
    });
    out.push('parts ' + parts.length);
  }
}
document.getElementById('probe').textContent = out.join('\\n');
</script>"""


# --------------------------------------------------------------------------------------------
# The ring


def ruler_length_mm(words: list[Word], first: str, last: str, count: int) -> float:
    """Printed distance between the centres of the scale digits ``first`` and ``last`` of a
    row of ``count`` consecutive digits (the check box's centimetre numbers)."""
    rows: dict[int, list[Word]] = {}
    for w in words:
        if w.text.isdigit():
            rows.setdefault(round(w.y0 * 2), []).append(w)
    for row in rows.values():
        texts = [w.text for w in sorted(row, key=lambda w: w.x0)]
        wanted = [str(k) for k in range(int(first), int(last) + 1)]
        if texts[:count] == wanted or texts == wanted:
            ordered = sorted(row, key=lambda w: w.x0)
            return ordered[int(last) - int(first)].centre_x - ordered[0].centre_x
    raise AssertionError(f"no row of digits {first}..{last} found")


@pytest.mark.parametrize("paper", ["A4", "letter"])
@pytest.mark.parametrize(("diameter_mm", "positions", "angles"), [
    (20.0, 4, None), (50.0, 36, None), (50.0, 3, None), (150.0, 12, None),
    (120.0, None, (0.0, 40.0, 95.0, 180.0, 270.0, 300.0))])
def test_ring_prints_at_scale_legible_and_without_overprint(
        diameter_mm: float, positions: int | None, angles: tuple[float, ...] | None,
        paper: str, tmp_path: Path) -> None:
    text, layout = ring_svg(diameter_mm, positions, angles_deg=angles,
                            title="Shop fan, motor side")
    assert layout.fits_a4_and_letter
    name = f"ring-{diameter_mm:g}-{positions or 'angles'}"
    source = tmp_path / f"{name}.svg"
    source.write_text(text, encoding="utf-8")
    pdf = print_pdf(source, paper, tmp_path)
    pages = pdf_pages(pdf)
    assert len(pages) == 1
    page = pages[0]
    width, height = PAPER_MM[paper]
    assert (page.width_mm, page.height_mm) == pytest.approx((width, height), abs=0.3)
    # 100 mm on the ruler prints as 100 mm (0.5 %: half a millimetre, a ruler's reading)
    assert ruler_length_mm(page.words, "0", "10", 11) == pytest.approx(100.0, rel=0.005)
    header = next(w for w in page.words if w.text == "trueturn")  # 3 mm = 8.5 pt
    assert smallest_pt(page.words, header, 3.0 * PT_PER_MM) >= MIN_PT - 0.1
    assert not overlapping(page.words)
    assert not merged_words(text, page.words)
    assert all(5.0 <= w.x0 and w.x1 <= width - 5.0 for w in page.words)  # on the sheet
    page_pixels(pdf, 1)  # kept as PNG for a look


@pytest.mark.parametrize("paper", ["A4", "letter"])
def test_tiled_ring_sheets_print_whole_with_their_own_check(paper: str,
                                                           tmp_path: Path) -> None:
    page_html, tiles = ring_tiles_html(300.0, 6, title="Big fan, inlet side")
    _, layout = ring_svg(300.0, 6, furniture=False)
    assert len(tiles) == len(plan_tiles(layout.width_mm, layout.height_mm))
    source = tmp_path / "tiles.html"
    source.write_text(page_html, encoding="utf-8")
    pdf = print_pdf(source, paper, tmp_path)
    pages = pdf_pages(pdf)
    assert len(pages) == len(tiles)  # one sheet per tile, no blank or split sheets
    for number, page in enumerate(pages, start=1):
        words = page.words
        label = [w for w in words if w.text == "Sheet"]
        assert len(label) == 1
        # the sheet's label and caution are above everything of the drawing
        caution = next(w for w in words if w.text == "Caution:")
        band_bottom = max(w.y1 for w in words if w.y0 <= caution.y1 + 4.0)
        drawing = [w for w in words if w.y0 > band_bottom]
        assert all(w.y0 > caution.y1 for w in drawing)
        assert "--tiles" not in " ".join(w.text for w in words)
        # the sheet's 50 mm box prints as 50 mm
        assert ruler_length_mm(words, "0", "5", 6) == pytest.approx(50.0, rel=0.005)
        assert not overlapping(words), number
        page_pixels(pdf, number, dpi=50)


@pytest.mark.parametrize("paper", ["A4", "letter"])
@pytest.mark.parametrize(("diameter_mm", "positions"), [(120.0, 8), (50.0, 36)])
def test_rim_strip_prints_at_scale_without_overprint(diameter_mm: float, positions: int,
                                                     paper: str, tmp_path: Path) -> None:
    text, layout = strip_svg(diameter_mm, positions, title="Pulley rim, belt side")
    source = tmp_path / f"strip-{diameter_mm:g}-{positions}.svg"
    source.write_text(text, encoding="utf-8")
    pdf = print_pdf(source, paper, tmp_path)
    pages = pdf_pages(pdf)
    assert len(pages) == 1
    page = pages[0]
    width, _ = PAPER_MM[paper]
    assert ruler_length_mm(page.words, "0", "10", 11) == pytest.approx(100.0, rel=0.005)
    header = next(w for w in page.words if w.text == "trueturn")  # 3 mm = 8.5 pt
    assert smallest_pt(page.words, header, 3.0 * PT_PER_MM) >= MIN_PT - 0.1
    assert not overlapping(page.words)
    assert not merged_words(text, page.words)
    assert all(5.0 <= w.x0 and w.x1 <= width - 5.0 for w in page.words)
    page_pixels(pdf, 1)

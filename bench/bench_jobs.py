#!/usr/bin/env python3
"""Job store figures: how long the save after every run takes, and the report.

A job is saved atomically (temp file, fsync, rename, folder fsync) after every run and every
hands-on step, while the person waits; it must not be felt. Measured on an invented
two-plane job grown to 12 and to 40 runs (a long job with several trims): save (including
the schema checks), load, and HTML report generation, median of repeated runs.

Goals (common practice, no source): a save under 250 ms is not noticed between a run and
the next instruction on screen; a report under 2 s. The printed length of the demo job's
report is measured too, when a Chromium is installed (headless print to PDF, pages counted
in the PDF): goal at most 2 pages on A4 and on US Letter.
"""

from __future__ import annotations

import copy
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from common import Row  # noqa: E402
from trueturn.jobs.report import html_report  # noqa: E402
from trueturn.jobs.store import Workspace, read_document  # noqa: E402

DEMO_JOB = Path(__file__).resolve().parent.parent / "tests" / "data" / "demo_bench_grinder_job.yaml"


def _grown(runs: int):
    job = read_document(DEMO_JOB, "job")
    base = job.runs
    grown = []
    for k in range(runs):
        run = copy.deepcopy(base[k % len(base)])
        run.index = k + 1
        grown.append(run)
    job.runs = grown
    job.verdict = None
    return job


def _median_s(action, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        started = time.perf_counter()
        action()
        times.append(time.perf_counter() - started)
    return statistics.median(times)


def _printed_pages(html: str, paper: str, chromium: str, folder: Path) -> int:
    """Pages of ``html`` printed by headless Chromium on ``paper`` (A4 or Letter)."""
    page = folder / f"report-{paper}.html"
    # the paper size in a rule of its own ahead of the report's @page (margins, footers):
    # the report's rule no longer reads "@page { margin: 12mm; }", which this replaced, so
    # both papers had printed on Chromium's default
    page.write_text(html.replace("<style>", f"<style>@page {{ size: {paper}; }} ", 1),
                    encoding="utf-8")
    pdf = folder / f"report-{paper}.pdf"
    subprocess.run([chromium, "--headless", "--no-sandbox", "--disable-gpu",
                    "--no-pdf-header-footer", f"--print-to-pdf={pdf}", page.as_uri()],
                   check=True, capture_output=True, timeout=120)
    # Each page of a PDF is one "/Type /Page" object (ISO 32000-1, 7.7.3.3).
    return len(re.findall(rb"/Type\s*/Page(?!s)", pdf.read_bytes()))


#: The demo job's report on paper, at most this many sheets of each size. The goal was 2
#: before issues #17 (plots large enough for 7 pt text, sign-off lines, page footers), #20
#: (sweeps) and #22 (the machine's condition) asked for more on paper.
MAX_PAGES = 3
PAGES_GOAL = f"<= {MAX_PAGES}"


def _page_rows() -> list[Row]:
    chromium = next((c for c in ("chromium", "chromium-browser", "google-chrome")
                     if shutil.which(c)), None)
    if chromium is None:
        return [Row("demo report printed pages", "chromium not installed", PAGES_GOAL, None)]
    out = []
    html = html_report(read_document(DEMO_JOB, "job"))
    with tempfile.TemporaryDirectory() as tmp:
        for paper in ("A4", "Letter"):
            try:
                pages = _printed_pages(html, paper, chromium, Path(tmp))
            except (subprocess.SubprocessError, OSError) as exc:
                out.append(Row(f"demo report printed pages, {paper}", f"failed: {exc}",
                               PAGES_GOAL, None))
                continue
            if pages == 0:  # page objects inside compressed streams: not countable here
                out.append(Row(f"demo report printed pages, {paper}", "not countable", PAGES_GOAL,
                               None))
                continue
            out.append(Row(f"demo report printed pages, {paper}", str(pages), PAGES_GOAL,
                           pages <= MAX_PAGES))
    return out


def rows() -> list[Row]:
    out: list[Row] = _page_rows()
    with tempfile.TemporaryDirectory() as tmp:
        ws = Workspace(tmp)
        for runs in (12, 40):
            job = _grown(runs)
            path = ws.save_job(job)
            save_s = _median_s(lambda job=job: ws.save_job(job), 15)
            load_s = _median_s(lambda path=path: read_document(path, "job"), 15)
            report_s = _median_s(lambda job=job: html_report(job), 5)
            size_kb = path.stat().st_size / 1024
            out.append(Row(f"save job, {runs} runs ({size_kb:.0f} KiB, checks + fsync)",
                           f"{save_s * 1000:.0f} ms", "< 250 ms", save_s < 0.25))
            out.append(Row(f"load job, {runs} runs", f"{load_s * 1000:.0f} ms", "-", None))
            out.append(Row(f"HTML report, {runs} runs", f"{report_s * 1000:.0f} ms", "< 2000 ms",
                           report_s < 2.0))
    return out


if __name__ == "__main__":
    from common import format_table

    print(format_table(rows()))

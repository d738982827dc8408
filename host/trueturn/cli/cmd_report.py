"""`trueturn report`: write a job report (self-contained HTML with SVG plots, or Markdown)."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from trueturn.errors import UserError


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "report", help="write a job report (HTML with SVG plots, or Markdown)",
        description="Write the report of a job: machine, runs, before/after table, 1x polar "
                    "plots, corrections and placed parts, the ISO 21940-11 verdict and the "
                    "safety cautions. The HTML page needs no network and prints on A4 or "
                    "Letter.")
    parser.add_argument("job", metavar="JOB", help="job file (.yaml) or job id in the workspace")
    parser.add_argument("-o", "--output", metavar="FILE",
                        help="where to write the report (default: JOB id + .html/.md here; "
                             "'-' for standard output)")
    parser.add_argument("--format", choices=("html", "md"), default=None,
                        help="report format (default: from the output name, else html)")
    parser.add_argument("--csv", metavar="FILE", help="also write every reading as CSV")
    parser.add_argument("--workspace", metavar="DIR",
                        help="workspace folder (default: $TRUETURN_WORKSPACE or the user data folder)")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    from trueturn.jobs.records import now_iso
    from trueturn.jobs.report import html_report, markdown_report, readings_csv
    from trueturn.jobs.store import Workspace, atomic_write_text

    job = Workspace.open(args.workspace).load_job(args.job)
    fmt = args.format
    if fmt is None:
        fmt = "md" if args.output and Path(args.output).suffix.lower() == ".md" else "html"
    generated = now_iso()
    text = html_report(job, generated) if fmt == "html" else markdown_report(job, generated)
    output = args.output or f"{job.job_id}.{fmt}"
    if output == "-":
        sys.stdout.write(text)
    else:
        if Path(output).is_dir():
            raise UserError(f"{output} is a folder; give a file name with -o")
        atomic_write_text(output, text)
        print(f"wrote {output}", file=sys.stderr)
    if args.csv:
        atomic_write_text(args.csv, readings_csv(job))
        print(f"wrote {args.csv}", file=sys.stderr)
    return 0

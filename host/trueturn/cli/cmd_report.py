"""`trueturn report`: write a job report (self-contained HTML with SVG plots, or Markdown)."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import TYPE_CHECKING

from trueturn.errors import UserError, one_line

if TYPE_CHECKING:
    from trueturn.jobs.store import Workspace


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "report", help="write a job report (HTML with SVG plots, or Markdown)",
        description="Write the report of a job: machine, runs, before/after table, 1x polar "
                    "plots, corrections and placed parts, the ISO 21940-11 verdict and the "
                    "safety cautions. The HTML page needs no network and prints on A4 or "
                    "Letter.")
    parser.add_argument("job", metavar="JOB", nargs="?",
                        help="job file (.yaml) or job id in the workspace")
    parser.add_argument("--list", action="store_true",
                        help="list the jobs in the workspace (oldest first) instead")
    parser.add_argument("--machine", metavar="NAME",
                        help="with --list: only the jobs of this machine (its history)")
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
    from trueturn.files import atomic_write_text, check_output
    from trueturn.jobs.records import now_iso
    from trueturn.jobs.report import (
        html_report,
        markdown_report,
        readings_csv,
        report_file_name,
    )
    from trueturn.jobs.store import Workspace

    workspace = Workspace.open(args.workspace)
    if args.list:
        return _list_jobs(workspace, args.machine)
    if not args.job:
        raise UserError("give a job file or job id (or --list to see the jobs)")
    # outputs checked before any work, so a bad -o or --csv is said first and nothing is
    # half-written (trueturn.files: regular files only, no links, the folder must exist)
    if args.output and args.output != "-":
        check_output(args.output, stdout_dash=True)
    if args.csv:
        check_output(args.csv)
    job = workspace.load_job(args.job)
    for run in job.runs:
        for sw in run.sweeps:
            if sw.points_problem is not None:  # the report says it too, in place of the plot
                print(f"note: the {sw.kind} of run {run.index} is reported without its plot: "
                      f"{one_line(sw.points_problem)}", file=sys.stderr)
    fmt = args.format
    if fmt is None:
        fmt = "md" if args.output and Path(args.output).suffix.lower() == ".md" else "html"
    generated = now_iso()
    text = html_report(job, generated) if fmt == "html" else markdown_report(job, generated)
    # without -o, the name comes from the job id made safe: never a path the file chooses
    output = args.output or report_file_name(job.job_id, fmt)
    if output == "-":
        sys.stdout.write(text)
    else:
        atomic_write_text(output, text)
        print(f"wrote {one_line(output)}", file=sys.stderr)
    if args.csv:
        atomic_write_text(args.csv, readings_csv(job))
        print(f"wrote {one_line(args.csv)}", file=sys.stderr)
    return 0


def _list_jobs(workspace: Workspace, machine: str | None) -> int:
    """Print one line per job (the machine's history with ``machine``); a file that cannot
    be read is listed as unreadable, and the listing goes on."""
    summaries, unreadable = workspace.scan_jobs(machine)
    if not summaries and not unreadable:
        where = f" for machine {one_line(machine)!r}" if machine else ""
        print(f"no jobs{where} in {one_line(workspace.jobs_dir)}", file=sys.stderr)
        return 0
    verdicts = {True: "within grade", False: "over grade", None: "-"}
    width = max((len(s.job_id) for s in summaries), default=0)
    for s in summaries:
        print(f"{one_line(s.job_id):<{width}}  {one_line(s.created)}  {one_line(s.status):<6}  "
              f"{s.runs:>2} runs  {verdicts[s.passed]}")
    for path, why in unreadable:
        print(f"{one_line(path.name)}  unreadable: {one_line(why)}")
    return 0

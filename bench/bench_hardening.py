"""Hardening (issue #18): the bad-input corpus of tests/hardening_corpus.py, each case run as a
person would, in its own (forked) process with a time limit (cases tried, tracebacks, hangs, answers
other than one line and exit 2), and the peak memory of `trueturn analyze` on a 40-minute
capture recorded from sim:// at run time (never committed), beside a 5-minute one: memory
bounded by the averaging window, not by the file."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import tempfile
import time
import traceback
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))

from common import Row  # noqa: E402
from hardening_corpus import Case, build  # noqa: E402

TIME_LIMIT_S = 30.0  # a case still running after this long counts as a hang
MEMORY_GOAL_MB = 300.0
# Runs `trueturn ARGS` and prints its own peak resident set size (kB on Linux) to stderr.
_MEASURED = ("import resource, sys\n"
             "from trueturn.cli.main import main\n"
             "code = main(sys.argv[1:])\n"
             "print('maxrss_kb', resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, "
             "file=sys.stderr)\n"
             "sys.exit(code)\n")


def _trueturn() -> list[str]:
    return [sys.executable, "-c", "import sys; from trueturn.cli.main import main; "
            "sys.exit(main(sys.argv[1:]))"]


def _preload() -> None:
    """Import every command once, so each forked case starts as a warm `trueturn`."""
    import importlib

    from trueturn.cli.main import COMMANDS

    for module, _ in COMMANDS.values():
        importlib.import_module(f"trueturn.cli.{module}")


def _run(case: Case, folder: Path) -> str:
    """'ok', 'traceback', 'hang' or 'other' (not exit 2 with one line): the case runs in a
    forked process (the imports already done), its output in files, killed after
    TIME_LIMIT_S."""
    work = folder / "work" / f"{abs(hash(case.name)):x}"
    work.mkdir(parents=True, exist_ok=True)
    err_path = work / ".stderr"
    pid = os.fork()
    if pid == 0:  # the child: a person's `trueturn ARGS` in a fresh folder
        code = 1
        try:
            os.chdir(work)
            os.environ["TRUETURN_WORKSPACE"] = str(work / "ws")
            out = os.open(os.devnull, os.O_WRONLY)
            err = os.open(err_path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
            os.dup2(out, 1)
            os.dup2(err, 2)
            sys.stdout = open(1, "w", closefd=False)  # noqa: SIM115
            sys.stderr = open(2, "w", closefd=False)  # noqa: SIM115
            from trueturn.cli.main import main

            try:
                code = main(list(case.argv))
            except SystemExit as exc:
                code = exc.code if isinstance(exc.code, int) else 2
        except BaseException:
            traceback.print_exc()
        finally:
            sys.stdout.flush()
            sys.stderr.flush()
            os._exit(code)
    deadline = time.monotonic() + TIME_LIMIT_S
    while True:
        done, status = os.waitpid(pid, os.WNOHANG)
        if done:
            break
        if time.monotonic() > deadline:
            os.kill(pid, signal.SIGKILL)
            os.waitpid(pid, 0)
            return "hang"
        time.sleep(0.005)
    stderr = err_path.read_text(errors="replace")
    if "Traceback" in stderr:
        return "traceback"
    lines = stderr.strip().splitlines()
    return "ok" if os.waitstatus_to_exitcode(status) == 2 and len(lines) == 1 else "other"


def _peak_mb(capture: Path) -> tuple[float, float]:
    started = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", _MEASURED, "analyze", str(capture)],
                          capture_output=True, text=True, check=True)
    wall = time.perf_counter() - started
    kb = next(int(line.split()[1]) for line in done.stderr.splitlines()
              if line.startswith("maxrss_kb"))
    return kb / 1024.0, wall


def _record(seconds: int, path: Path) -> None:
    subprocess.run([*_trueturn(), "record", "--port", "sim://bench-grinder?realtime=0",
                    "--seconds", str(seconds), "--quiet", "-o", str(path)],
                   capture_output=True, check=True)


def rows() -> list[Row]:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        cases = build(folder / "corpus")
        _preload()
        started = time.perf_counter()
        outcomes = [_run(case, folder) for case in cases]
        corpus_s = time.perf_counter() - started
        counts = {k: outcomes.count(k) for k in ("ok", "traceback", "hang", "other")}
        odd = [c.name for c, o in zip(cases, outcomes, strict=True) if o != "ok"]
        if odd:
            print(f"bench_hardening: not one line and exit 2: {odd[:10]}", file=sys.stderr)

        short, long_ = folder / "5min.cap", folder / "40min.cap"
        _record(5 * 60, short)
        _record(40 * 60, long_)
        short_mb, _ = _peak_mb(short)
        long_mb, long_s = _peak_mb(long_)
        size_mb = long_.stat().st_size / 1e6
    return [
        Row("hardening: bad-input cases tried (every command)", str(len(cases)), ">= 200",
            len(cases) >= 200),
        Row("hardening: tracebacks", str(counts["traceback"]), "0", counts["traceback"] == 0),
        Row("hardening: hangs (over 30 s)", str(counts["hang"]), "0", counts["hang"] == 0),
        Row("hardening: answers not one line + exit 2", str(counts["other"]), "0",
            counts["other"] == 0),
        Row("hardening: corpus wall time (one forked process per case)", f"{corpus_s:.0f} s",
            "-", None),
        Row(f"analyze: peak memory, 40-min capture ({size_mb:.0f} MB)", f"{long_mb:.0f} MB",
            f"<= {MEMORY_GOAL_MB:.0f} MB", long_mb <= MEMORY_GOAL_MB),
        Row("analyze: peak memory, 40-min minus 5-min capture", f"{long_mb - short_mb:+.0f} MB",
            "<= +10 MB (not growing with the file)", long_mb - short_mb <= 10.0),
        Row("analyze: 40-min capture wall time", f"{long_s:.1f} s", "-", None),
    ]


if __name__ == "__main__":
    from common import format_table

    print(format_table(rows()))

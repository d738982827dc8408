"""The bad-input corpus of issue #18: every command against odd files, odd targets, absurd
numbers and hostile documents. Each case must end with exit status 2 and one line on stderr
(no traceback, no warning), quickly, and leave every file it was pointed at as it was.

Used by tests/test_hardening.py (in-process, every case) and bench/bench_hardening.py (each
case in its own process with a time limit: tracebacks and hangs counted). Files come from
tests/data/hardening/ (small ones kept) and from :func:`build` (generated at run time: deep
nesting, 17 MB files, FIFOs, symbolic links, devices). All data invented.
"""

from __future__ import annotations

import os
import shutil
import stat
import struct
from dataclasses import dataclass, field
from pathlib import Path

DATA = Path(__file__).resolve().parent / "data" / "hardening"
JOB = Path(__file__).resolve().parent / "data" / "demo_bench_grinder_job.yaml"
SIM = "sim://bench-grinder?realtime=0"


@dataclass(frozen=True)
class Case:
    """One command line that must be refused with one line and exit 2."""

    name: str
    argv: tuple[str, ...]
    # paths the case points at that must be left exactly as they were (kind, bytes, link)
    untouched: tuple[Path, ...] = field(default=())


def _capture(path: Path, header: bytes, body: bytes = b"") -> Path:
    path.write_bytes(b"TTCAP1\r\n" + struct.pack("<I", len(header)) + header + body)
    return path


def fingerprint(path: Path) -> tuple[object, ...]:
    """What must not change: the kind of file, a link's target, a regular file's bytes."""
    try:
        info = os.lstat(path)
    except FileNotFoundError:
        return ("absent",)
    if stat.S_ISLNK(info.st_mode):
        return ("link", os.readlink(path))
    if stat.S_ISREG(info.st_mode):
        return ("file", path.read_bytes())
    return ("other", stat.S_IFMT(info.st_mode))


def build(folder: Path) -> list[Case]:
    """Create the generated bad files in ``folder`` and return every case."""
    folder.mkdir(parents=True, exist_ok=True)
    f = folder

    # --- hostile documents (YAML) -------------------------------------------------------
    (f / "deep.yaml").write_text("planes: " + "[" * 2000 + "]" * 2000 + "\n")
    (f / "deep100.yaml").write_text("planes: " + "[" * 100 + "]" * 100 + "\n")
    (f / "huge.yaml").write_bytes(b"# " + b"x" * (17 * 1024 * 1024) + b"\n")
    (f / "empty.yaml").write_text("")
    (f / "binary.yaml").write_bytes(bytes(range(256)) * 4)
    (f / "list.yaml").write_text("- 1\n- 2\n")
    job = JOB.read_text(encoding="utf-8")
    bomb = (DATA / "alias-bomb-readings.yaml").read_text(encoding="utf-8")
    (f / "bomb-job.yaml").write_text(job + "\n" + bomb.replace("planes: *l8", "notes2: *l8"))
    (f / "job-newer.yaml").write_text(job.replace("schema_version: 1", "schema_version: 99"))
    (f / "job-nan-mass.yaml").write_text(job.replace("mass_g: ", "mass_g: .nan #", 1))
    for name in ("deep.yaml", "deep100.yaml", "huge.yaml", "empty.yaml", "binary.yaml",
                 "list.yaml"):
        shutil.copy(f / name, f / f"scenario-{name}")

    # --- odd inputs: devices, FIFOs, folders, links, names --------------------------------
    fifo = f / "fifo"
    if not fifo.exists():
        os.mkfifo(fifo)
    (f / "folder").mkdir(exist_ok=True)
    dangling = f / "dangling.yaml"
    if not dangling.is_symlink():
        dangling.symlink_to(f / "nowhere.yaml")
    odd_inputs = ["/dev/zero", "/dev/urandom", str(fifo), str(f / "folder"), str(dangling),
                  str(f / "missing.cap"), "bad\x01name.cap"]

    # --- bad captures ----------------------------------------------------------------------
    caps = {
        "cap-deep-header": b"[" * 200_000 + b"]" * 200_000,
        "cap-not-json": b"{not json",
        "cap-not-object": b"[1, 2]",
        "cap-inf-seconds": b'{"requested": {"seconds": 1e999}}',
        "cap-nan-mains": b'{"mains_hz": NaN}',
        "cap-text-rate": b'{"requested": {"rate_hz": "fast"}}',
        "cap-newer-format": b'{"format_version": 99}',
        "cap-identity-zero-clock": (b'{"identity": {"protocol_version": 3, "definition_hash": 1, '
                                    b'"firmware_major": 0, "firmware_minor": 0, '
                                    b'"firmware_patch": 0, "board_id": 1, "tick_hz": 0, '
                                    b'"adc_bits": 10, "adc_reference_mv": 5000, '
                                    b'"adc_reference_kind": 0, "aperture_delay_ticks": 0, '
                                    b'"max_channels": 2, "channel0_pin": 0, "channel1_pin": 1, '
                                    b'"tach_pin": 8, "reset_flags": 0}}'),
        "cap-pickup-sensitivity": b'{"pickups": [{"name": "a", "sensitivity_v_per_g": -1e308}]}',
        "cap-pickups-many": b'{"pickups": [' + b",".join([b"{}"] * 50) + b"]}",
    }
    cap_files = [_capture(f / f"{k}.cap", v) for k, v in caps.items()]
    (f / "cap-short.cap").write_bytes(b"TTCAP1\r\n\x10\x00")
    (f / "cap-long-claim.cap").write_bytes(b"TTCAP1\r\n\xff\xff\xff\xff{}")
    cap_files += [f / "cap-short.cap", f / "cap-long-claim.cap"]
    cap_files += sorted(DATA.glob("*.cap"))
    (f / "noframes.cap").write_bytes(b"\x01\x02\x03" * 1000)

    # --- output targets that must not be written -------------------------------------------
    real = f / "precious.txt"
    real.write_text("precious\n")
    link = f / "link.out"
    if not link.is_symlink():
        link.symlink_to(real)
    dangling_out = f / "dangling.out"
    if not dangling_out.is_symlink():
        dangling_out.symlink_to(f / "made-by-link.out")
    outputs = {"fifo": fifo, "link": link, "dangling-link": dangling_out,
               "folder": f / "folder", "missing-folder": f / "no" / "such" / "r.out",
               "dev-null": Path("/dev/null")}
    keep = (real, link, dangling_out, fifo, f / "made-by-link.out", f / "no")

    cases: list[Case] = []

    def add(name: str, *argv: str, untouched: tuple[Path, ...] = ()) -> None:
        cases.append(Case(name, tuple(argv), untouched))

    # documents into every command that reads one
    docs = ["deep.yaml", "deep100.yaml", "huge.yaml", "empty.yaml", "binary.yaml",
            "list.yaml", "bomb-job.yaml"]
    for doc in docs:
        add(f"solve {doc}", "solve", str(f / doc))
        add(f"sim describe {doc}", "sim", "describe", str(f / f"scenario-{doc}"
                                                         if doc != "bomb-job.yaml" else f / doc))
        add(f"report {doc}", "report", str(f / doc), "-o", "-")
        add(f"record sim://{doc}", "record", "--port", f"sim://{f / f'scenario-{doc}'}"
            if doc != "bomb-job.yaml" else f"sim://{f / doc}", "--seconds", "1",
            "-o", str(f / "out.cap"))
    for kept in sorted(DATA.glob("*.yaml")):
        add(f"solve {kept.name}", "solve", str(kept))
        add(f"report {kept.name}", "report", str(kept), "-o", "-")
        add(f"sim describe {kept.name}", "sim", "describe", str(kept))
    add("report newer job", "report", str(f / "job-newer.yaml"), "-o", "-")
    add("report job with nan mass", "report", str(f / "job-nan-mass.yaml"), "-o", "-")
    add("demo deep scenario", "demo", str(f / "scenario-deep.yaml"))
    add("demo alias bomb", "demo", str(DATA / "alias-bomb-readings.yaml"))
    for pace in ("nan", "inf", "0", "1e300", "-1"):
        add(f"demo --pace {pace}", "demo", "bench-grinder", "--pace", pace,
            "--workspace", str(f / "demo-ws"))
    add("ui sim://deep", "ui", "--port", f"sim://{f / 'scenario-deep.yaml'}")
    for label in ("fifo", "link", "dangling-link", "folder", "missing-folder"):
        add(f"ui --job {label}", "ui", "--port", SIM, "--job", str(outputs[label]),
            untouched=keep)

    # odd inputs into every command that reads a file
    for path in odd_inputs:
        short = Path(path).name.encode("unicode_escape").decode()
        add(f"dump {short}", "dump", path)
        add(f"analyze {short}", "analyze", path)
        add(f"solve {short}", "solve", path)
        add(f"report {short}", "report", path, "-o", "-")
        if path.startswith("/dev/") or path == str(fifo):
            add(f"sim describe {short}.yaml-less", "sim", "describe", path)
    for path in cap_files:
        add(f"dump {path.name}", "dump", str(path))
        add(f"analyze {path.name}", "analyze", str(path))
    add("analyze noframes", "analyze", str(f / "noframes.cap"))

    # outputs that are not regular files, links, missing folders
    for label, target in outputs.items():
        add(f"report -o {label}", "report", str(JOB), "-o", str(target), untouched=keep)
        add(f"report --csv {label}", "report", str(JOB), "-o", "-", "--csv", str(target),
            untouched=keep)
        add(f"ring -o {label}", "ring", "--diameter-mm", "100", "--positions", "4", "-o",
            str(target), untouched=keep)
        add(f"record -o {label}", "record", "--port", SIM, "--seconds", "1", "-o",
            str(target), untouched=keep)

    # numbers
    numbers = {
        "split": (["--mass-g", "3", "--angle-deg", "10", "--positions", "4"],
                  {"--positions": ["100000000", "0", "-4", "1e3"],
                   "--mass-g": ["nan", "inf", "-1", "1e300"],
                   "--angle-deg": ["nan", "1e300", "-inf"],
                   "--first-deg": ["nan", "1e300"]}),
        "split --remove": (["--mass-g", "3", "--angle-deg", "10", "--positions", "4",
                            "--remove", "--drill-mm", "6"],
                           {"--drill-mm": ["1e-300", "3.7e12", "0", "nan"],
                            "--density-g-cm3": ["0", "1e-300", "inf"],
                            "--point-deg": ["0", "1e300", "nan"]}),
        "trial-mass": (["--rotor-mass-kg", "3", "--radius-mm", "50", "--speed-rpm", "3000"],
                       {"--speed-rpm": ["1e-300", "1e300", "0", "nan", "-3000"],
                        "--rotor-mass-kg": ["1e-300", "1e300", "0"],
                        "--radius-mm": ["1e-300", "1e300", "inf"],
                        "--force-ratio": ["0", "1e300", "nan"],
                        "--max-mass-g": ["0", "-1", "nan"]}),
        "grade": (["--rotor-mass-kg", "4", "--speed-rpm", "3450", "--grade", "6.3"],
                  {"--rotor-mass-kg": ["1e300", "1e-300", "nan"],
                   "--speed-rpm": ["1e300", "1e-300"],
                   "--grade": ["1e300", "G1e-400", "nan"],
                   "--plane-distance-mm": ["1e300", "0", "nan"]}),
        # imperial twins (#17): the same spans; metric and imperial of one quantity together
        "trial-mass #imperial": (["--rotor-mass-lb", "10", "--radius-in", "3", "--speed-rpm",
                                 "3450"],
                                {"--rotor-mass-lb": ["1e-300", "1e300", "0", "nan"],
                                 "--radius-in": ["1e-300", "1e300", "inf"],
                                 "--max-mass-oz": ["0", "-1", "nan"],
                                 "--rotor-mass-kg": ["4"], "--radius-mm": ["75"]}),
        "split #imperial": (["--mass-oz", "0.1", "--angle-deg", "10", "--positions", "4"],
                           {"--mass-oz": ["nan", "inf", "-1", "1e300"],
                            "--mass-g": ["3"],
                            "--drill-in": ["1e-300", "3.7e12", "0", "nan"],
                            "--have-oz": ["0", "nan"], "--radius-in": ["1e300"],
                            "--rotor-mass-lb": ["inf"]}),
        "grade #imperial": (["--rotor-mass-lb", "10", "--speed-rpm", "3450", "--grade", "6.3"],
                           {"--rotor-mass-lb": ["1e300", "1e-300", "nan"],
                            "--rotor-mass-kg": ["4"],
                            "--plane-distance-in": ["1e300", "0", "nan"],
                            "--cg-axial-in": ["nan", "1e300"]}),
        "ring": (["--diameter-mm", "100", "--positions", "4", "-o", str(f / "ring.svg")],
                 {"--diameter-mm": ["1e-300", "3.7e12", "nan"],
                  "--positions": ["100000000", "0"],
                  "--first-deg": ["1e300", "nan"]}),
    }
    for command, (base, options) in numbers.items():
        words = command.partition("#")[0].split()  # '#...' names a second set of a command
        for option, values in options.items():
            for value in values:
                argv = list(base)
                if option in argv:
                    argv[argv.index(option) + 1] = value
                else:
                    argv += [option, value]
                add(f"{command} {option} {value}", words[0], *argv, *words[1:])
    add("grade residual 1e300", "grade", "--rotor-mass-kg", "4", "--speed-rpm", "3450",
        "--grade", "6.3", "--residual-gmm", "1e300", "1")
    add("grade residual ozin 1e300", "grade", "--rotor-mass-lb", "4", "--speed-rpm", "3450",
        "--grade", "6.3", "--residual-ozin", "1e300", "1")
    add("grade residual gmm and ozin", "grade", "--rotor-mass-lb", "4", "--speed-rpm", "3450",
        "--grade", "6.3", "--residual-ozin", "1", "1", "--residual-gmm", "1", "1")
    add("split --combine-oz nan", "split", "--combine-oz", "0.1@nan", "0.2@10", "--positions",
        "4")
    add("split --combine-oz 1e300", "split", "--combine-oz", "1e300@0", "--positions", "4")
    add("split --combine and --combine-oz", "split", "--combine", "3@0", "--combine-oz",
        "0.1@90", "--positions", "4")
    add("split --combine nan", "split", "--combine", "3@nan", "4@10", "--positions", "4")
    add("analyze --revs huge", "analyze", str(f / "noframes.cap"), "--revs", "100000000000")
    for option, value in (("--sensitivity-v-per-g", "nan"), ("--sensitivity-v-per-g", "1e300"),
                          ("--sensitivity-v-per-g", "1e-300"), ("--lowpass-hz", "1e300"),
                          ("--lowpass-hz", "1e-300"), ("--lowpass-hz", "1,inf")):
        add(f"analyze {option} {value}", "analyze", str(f / "noframes.cap"), option, value)
    for rpm in ("1e300", "1e-300", "nan", "-inf"):
        add(f"sim describe --rpm {rpm}", "sim", "describe", "bench-grinder", "--rpm", rpm)

    # virtual rigs with absurd options
    for option in ("noise=nan", "pace=inf", "pace=0", "rpm=1e300", "rpm=0", "seed=-1",
                   "tick0=1e99", "unbalance=lots", "nonsense=1"):
        add(f"record sim:// {option}", "record", "--port", f"{SIM}&{option}", "--seconds",
            "1", "-o", str(f / "out.cap"))
    for seconds in ("nan", "inf", "1e300", "0", "-1"):
        add(f"record --seconds {seconds}", "record", "--port", SIM, "--seconds", seconds,
            "-o", str(f / "out.cap"))
    add("record --channels 4", "record", "--port", SIM, "--seconds", "1", "--channels", "4",
        "-o", str(f / "out.cap"))
    add("record --rate-hz 1e9", "record", "--port", SIM, "--seconds", "1", "--rate-hz",
        "1000000000", "-o", str(f / "out.cap"))
    add("emu:// absolute missing", "record", "--port", f"emu://{f / 'missing.yaml'}",
        "--seconds", "1", "-o", str(f / "out.cap"))
    add("emu:// noise nan", "record", "--port", "emu://bench-grinder?noise=nan",
        "--seconds", "1", "-o", str(f / "out.cap"))
    for image in ("/dev/zero", str(fifo), str(f / "deep.yaml"), str(f / "huge.yaml"),
                  str(dangling)):
        add(f"flash --image {Path(image).name}", "flash", "--port", "/dev/ttyUSB0", "--image",
            image, "--dry-run")
    for baud in ("0", "1e300", "999999999"):
        add(f"flash --baud {baud}", "flash", "--port", "/dev/ttyUSB0", "--baud", baud,
            "--dry-run")
    add("check sim:// noise nan", "check", "--port", f"{SIM}&noise=nan")
    add("report job id not in workspace", "report", "../../etc/passwd", "-o", "-",
        "--workspace", str(f / "ws"))
    return cases

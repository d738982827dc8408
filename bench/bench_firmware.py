"""Firmware figures: flash and RAM against budget, interrupt CPU load at 2 x 4 kSps counted
in the emulator, cycles per interrupt handler, dropped samples over a long emulated run, and
how fast the emulator runs.

The long run lasts TT_BENCH_EMU_SECONDS simulated seconds (default 60 = 1 minute).
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from common import Row

REPO = Path(__file__).resolve().parent.parent
FIRMWARE = REPO / "firmware"
ELF = FIRMWARE / "build" / "trueturn.elf"
HARNESS = FIRMWARE / "build" / "tt_emu"
sys.path.insert(0, str(REPO / "host"))

FLASH_BUDGET_BYTES = 16 * 1024
RAM_BUDGET_BYTES = 1536
LOAD_GOAL = 0.30
LONG_RUN_S = float(os.environ.get("TT_BENCH_EMU_SECONDS", "60"))


def _sizes() -> dict[str, int]:
    out = subprocess.run(["avr-size", "-A", str(ELF)], capture_output=True, text=True,
                         check=True).stdout
    return {m.group(1): int(m.group(2))
            for m in re.finditer(r"^(\.\w+)\s+(\d+)\s+\d+", out, re.MULTILINE)}


def _run_stream(seconds: float, scenario: str = "bench-grinder") -> tuple[dict, dict, float]:
    """Run the firmware streaming 2 x 4 kSps for `seconds`; return (report, counters, wall)."""
    from trueturn.link.codec import StreamDecoder, encode_frame
    from trueturn.sim import signal_spec
    from trueturn.sim.handlers.protocol_emu import harness_args

    configure = encode_frame("configure", 1, {"rate_hz": 4000, "channels": 2, "tach_edge": 1})
    start = encode_frame("start", 2)
    with tempfile.TemporaryDirectory() as tmp:
        report_path = Path(tmp) / "report.json"
        out_path = Path(tmp) / "uart.bin"
        argv = [str(HARNESS), *harness_args(signal_spec(scenario)), "--seconds", str(seconds),
                "--report", str(report_path), "--script", configure.hex() + "@0.01",
                "--script", start.hex() + "@0.02", str(ELF)]
        started = time.perf_counter()
        with open(out_path, "wb") as out:
            subprocess.run(argv, stdin=subprocess.DEVNULL, stdout=out,
                           stderr=subprocess.DEVNULL, check=True)
        wall = time.perf_counter() - started
        report = json.loads(report_path.read_text())
        decoder = StreamDecoder()
        messages = decoder.feed(out_path.read_bytes())
    statuses = [m for m in messages if getattr(m, "name", "") == "status"]
    counters = decoder.counters.to_json()
    counters["board_samples_dropped"] = statuses[-1]["samples_dropped"] if statuses else -1
    counters["samples"] = sum(len(m["samples"]) for m in messages
                              if getattr(m, "name", "") == "samples")
    return report, counters, wall


def rows() -> list[Row]:
    subprocess.run(["make", "-s", "-C", str(FIRMWARE), "emu"], check=True,
                   stdout=subprocess.DEVNULL)
    sizes = _sizes()
    flash = sizes[".text"] + sizes.get(".data", 0)
    ram = sizes.get(".data", 0) + sizes.get(".bss", 0) + sizes.get(".noinit", 0)
    out = [
        Row("firmware flash (text+data)", f"{flash} B", f"<= {FLASH_BUDGET_BYTES} B",
            flash <= FLASH_BUDGET_BYTES),
        Row("firmware RAM (data+bss+noinit)", f"{ram} B", f"<= {RAM_BUDGET_BYTES} B",
            ram <= RAM_BUDGET_BYTES),
    ]
    report, counters, wall = _run_stream(LONG_RUN_S)
    load = report["isr_load"]
    out.append(Row("firmware ISR CPU load, 2 x 4 kSps (emulated)", f"{100 * load:.1f} %",
                   f"<= {100 * LOAD_GOAL:.0f} %", load <= LOAD_GOAL))
    for name, h in sorted(report["handlers"].items()):
        out.append(Row(f"  {name} cycles per call (mean / max)",
                       f"{h['mean_cycles']:.0f} / {h['max_cycles']}", "-", None))
    lost = counters["samples_lost"] + counters["board_samples_dropped"]
    out.append(Row(f"dropped samples over {LONG_RUN_S / 60:.1f} emulated min",
                   f"{lost} of {counters['samples']}", "0",
                   lost == 0 and counters["frames_lost"] == 0 and counters["frames_bad"] == 0))
    out.append(Row("emulator speed (simulated s per wall s)",
                   f"{report['sim_seconds'] / wall:.2f}", "-", None))
    return out


if __name__ == "__main__":
    from common import format_table

    print(format_table(rows()))

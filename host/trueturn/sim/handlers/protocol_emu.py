"""pyserial URL handler ``emu://SCENARIO[?options]``: the real firmware, emulated, as a port.

The firmware ELF (firmware/build/trueturn.elf) runs in simavr under the harness
firmware/build/tt_emu, which synthesises the pickup voltages and the tach from the scenario's
steady signal spec (:func:`trueturn.sim.signal_spec`) and joins the board's UART to this port.
Unlike ``sim://`` (a Python model of the board), every byte here comes from the firmware.

Options (all optional):

``realtime=1|0``  1 (default): the emulated time does not run ahead of the wall clock;
                  0: as fast as the emulator runs (about 1-2x real time on a laptop).
``seconds=S``     stop the emulated board after S simulated seconds (default: run until closed).
``seed=N``        noise seed (default 1).
``rpm=R``         shaft speed instead of the scenario's.
``noise=F``       scale noise, hum, harmonics, tones and tach jitter (0 = clean signal).
``channels=1|2``  pickups connected (default 2).
``tach=none|chatter``  chatter: after every tach edge a burst of 10 more edges 160 CPU cycles
                  (10 us) apart, as a comparator without hysteresis gives on a slow mark edge
                  (the same burst as ``sim://...?tach=chatter``); the firmware's hold-off
                  must drop them (status.tach_suppressed).
``reset_on_open=1|0``  1: the board is held in reset while its bootloader listens after the
                  port opens (``bootloader=new|old``: about 0.5 or 1.5 s of wall time,
                  trueturn.link.boards.BOOTLOADER_WAIT_S); bytes written then are swallowed
                  and make it wait again from that byte; then the firmware starts.
                  0: the board does not reset on open and runs already: its power-up
                  identity went out before the port opened (the first frame is dropped).
                  Without the option the firmware starts as the port opens.
``aref=MV``       run the AREF build of the firmware (``make -C firmware ADC_REF=aref``,
                  firmware/build-aref/) with MV millivolts on its AREF pin (e.g. 3300: the
                  pickups' 3.3 V rail; 1000: a pin left open reads the bandgap at full scale).
                  Without it: the standard AVCC build.

After :meth:`Serial.close`, ``port.report`` holds the harness report: simulated and wall
seconds, CPU cycles spent in each interrupt handler and the interrupt load.
"""

from __future__ import annotations

import json
import math
import os
import shutil
import subprocess
import tempfile
import threading
import time
import urllib.parse
from pathlib import Path
from typing import TYPE_CHECKING, Any

from serial.serialutil import PortNotOpenError, SerialException

from trueturn.errors import UserError
from trueturn.link.boards import BOOTLOADER_WAIT_S
from trueturn.link.handlers.virtual import VirtualLineSerial

if TYPE_CHECKING:
    from typing_extensions import Buffer  # what pyserial's stubs take (PEP 688)

_USAGE = ('expected "emu://SCENARIO[?realtime=0|1&seconds=S&seed=N&rpm=R&noise=F&channels=1|2'
          '&tach=none|chatter&reset_on_open=0|1&bootloader=new|old&aref=MV]"')
#: ``tach=chatter``: extra edges after each real one and their spacing in CPU cycles
#: (trueturn.sim.board.TACH_CHATTER_EDGES, TACH_CHATTER_GAP_TICKS x 8 cycles per tick)
CHATTER_EDGES = 10
CHATTER_GAP_CYCLES = 160

#: What a bootloader leaves after the reset of opening the port (firmware/README.md,
#: "Watchdog and bootloaders"): the old Nano bootloader keeps MCUSR (EXTRF); optiboot clears it
#: and passes it in r2.
RESET_PRESETS = {"old": ["--mcusr", "2"], "new": ["--mcusr", "0", "--r2", "2"]}

#: The firmware folder of a source checkout (override with TRUETURN_FIRMWARE_DIR).
FIRMWARE_DIR = Path(os.environ.get("TRUETURN_FIRMWARE_DIR")
                    or Path(__file__).resolve().parents[4] / "firmware")


#: The firmware's build variants (firmware/Makefile ``ADC_REF``) and their output folders.
BUILD_DIRS = {"avcc": "build", "aref": "build-aref"}


def _finite(value: str, low: float, high: float) -> float:
    """A URL option's number within ``low..high``; nan, inf and the like are a ValueError."""
    number = float(value)
    if not (math.isfinite(number) and low <= number <= high):
        raise ValueError(value)
    return number


def firmware_paths(firmware_dir: Path = FIRMWARE_DIR, adc_ref: str = "avcc") -> tuple[Path, Path]:
    """(ELF, harness) paths inside the firmware folder, for the build variant ``adc_ref``."""
    build = firmware_dir / BUILD_DIRS[adc_ref]
    return build / "trueturn.elf", build / "tt_emu"


def ensure_built(firmware_dir: Path = FIRMWARE_DIR, adc_ref: str = "avcc") -> tuple[Path, Path]:
    """Bring the ELF and the harness up to date with ``make -C firmware ADC_REF=... emu`` (a
    no-op when nothing changed); without make or a Makefile, use what is built."""
    elf, harness = firmware_paths(firmware_dir, adc_ref)
    if not (firmware_dir / "Makefile").is_file() and not (elf.is_file() and harness.is_file()):
        raise SerialException(f"emu:// runs the firmware of a source checkout, and {firmware_dir} "
                              "is not one: run from a checkout or set TRUETURN_FIRMWARE_DIR to "
                              "its firmware/ folder")
    hint = f"the emulator is not built: run `make -C {firmware_dir} ADC_REF={adc_ref} emu`"
    if (firmware_dir / "Makefile").is_file() and shutil.which("make") is not None:
        done = subprocess.run(["make", "-s", "-C", str(firmware_dir), f"ADC_REF={adc_ref}", "emu"],
                              capture_output=True, text=True, check=False)
        if done.returncode != 0:
            last = (done.stderr.strip().splitlines() or ["make failed"])[-1]
            raise SerialException(f"{hint} ({last})")
    if not (elf.is_file() and harness.is_file()):
        raise SerialException(hint)
    return elf, harness


def harness_args(spec: dict[str, Any]) -> list[str]:
    """Command-line arguments of tt_emu for a signal spec (trueturn.sim.signal_spec format)."""
    args = ["--speed-rpm", repr(float(spec["speed_rpm"])),
            "--ref-v", repr(float(spec["adc_reference_v"])),
            "--seed", str(int(spec.get("seed", 1))),
            "--first-edge-s", repr(float(spec["tach"]["first_edge_s"])),
            "--jitter-rms-s", repr(float(spec["tach"].get("jitter_rms_s", 0.0)))]
    for ch, chan in enumerate(spec["channels"]):
        args += ["--channel", f"{float(chan['offset_v'])!r},{float(chan['noise_rms_v'])!r}"]
        for o in chan.get("orders", []):
            args += ["--order", f"{ch},{float(o['order'])!r},{float(o['amplitude_v'])!r},"
                                f"{float(o['phase_deg'])!r}"]
        for t in chan.get("tones", []):
            args += ["--tone", f"{ch},{float(t['hz'])!r},{float(t['amplitude_v'])!r},"
                               f"{float(t['phase_deg'])!r}"]
    return args


class Serial(VirtualLineSerial):
    """A serial port whose other end is the firmware running in the emulator."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        self.report: dict[str, Any] | None = None
        self.spec: dict[str, Any] | None = None
        self._proc: subprocess.Popen[bytes] | None = None
        self._buffer = bytearray()
        self._cond = threading.Condition()
        self._eof = False
        self._reader: threading.Thread | None = None
        self._tmpdir: tempfile.TemporaryDirectory[str] | None = None
        self._argv: list[str] = []
        self._boot_at: float | None = None  # monotonic time the bootloader hands over
        self._boot_wait_s = 0.0
        self._booter: threading.Thread | None = None
        self._closing = False
        self._drop_first_frame = False
        self.bootloader_bytes = 0  # bytes the host wrote into the bootloader's window
        super().__init__(*args, **kwargs)

    # --- pyserial plumbing ------------------------------------------------------------------

    def open(self) -> None:
        name, options = self.from_url(self._check_can_open())
        from trueturn.sim import signal_spec  # late import: sim pulls in numpy/scipy

        try:
            self.spec = signal_spec(name, channels=options.pop("channels"), **options.pop("spec"))
        except (UserError, ValueError, OSError) as exc:
            raise SerialException(f"emu://{name}: {exc}") from None
        elf, harness = ensure_built(adc_ref="aref" if options["aref_mv"] else "avcc")
        self._tmpdir = tempfile.TemporaryDirectory(prefix="trueturn-emu-")
        report = Path(self._tmpdir.name) / "report.json"
        argv = [str(harness), *harness_args(self.spec), "--report", str(report)]
        if options["realtime"]:
            argv.append("--realtime")
        if options["seconds"]:
            argv += ["--seconds", repr(options["seconds"])]
        if options["aref_mv"]:
            argv += ["--aref-v", repr(options["aref_mv"] / 1000.0)]
        if options["tach"] == "chatter":
            argv += ["--tach-chatter", f"{CHATTER_EDGES},{CHATTER_GAP_CYCLES}"]
        if options["reset_on_open"]:
            # the reset pin (DTR) started the board; what its bootloader leaves the firmware
            argv += RESET_PRESETS[options["bootloader"]]
        argv.append(str(elf))
        self._argv = argv
        self._report_path = report
        self._log = open(Path(self._tmpdir.name) / "stderr.txt", "wb")  # noqa: SIM115
        self._eof = False
        self._closing = False
        self._drop_first_frame = options["reset_on_open"] is False
        if options["reset_on_open"]:
            self._boot_wait_s = BOOTLOADER_WAIT_S[options["bootloader"]]
            self._boot_at = time.monotonic() + self._boot_wait_s
            self._booter = threading.Thread(target=self._bootloader, name="emu-bootloader",
                                            daemon=True)
            self._booter.start()
        else:
            self._spawn()
        self.is_open = True

    def _spawn(self) -> None:
        """Start the emulated board (the firmware runs from its reset vector)."""
        self._proc = subprocess.Popen(self._argv, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                      stderr=self._log, bufsize=0)
        self._reader = threading.Thread(target=self._read_loop, name="emu-reader", daemon=True)
        self._reader.start()

    def _bootloader(self) -> None:
        """Hold the board in its bootloader until the wait (moved by bytes written) ends."""
        with self._cond:
            while not self._closing:
                assert self._boot_at is not None
                remaining = self._boot_at - time.monotonic()
                if remaining <= 0:
                    self._boot_at = None
                    self._spawn()
                    return
                self._cond.wait(remaining)

    @property
    def in_bootloader(self) -> bool:
        """True while the bootloader listens after the reset of opening the port."""
        with self._cond:
            return self._boot_at is not None

    def from_url(self, url: str) -> tuple[str, dict[str, Any]]:
        """Parse ``emu://NAME?options`` into the scenario name and options."""
        parts = urllib.parse.urlsplit(url)
        if parts.scheme != "emu":
            raise SerialException(f"{_USAGE}, not starting with emu:// ({url!r})")
        # emu://NAME, emu://folder/file.yaml, emu:///abs/path.yaml (the leading / kept)
        name = (parts.netloc + parts.path if parts.netloc else parts.path).rstrip("/")
        if not name:
            raise SerialException(f"{_USAGE}: scenario name missing")
        opts: dict[str, Any] = {"realtime": True, "seconds": 0.0, "channels": 2, "spec": {},
                                "tach": "none", "reset_on_open": None, "bootloader": "new", "aref_mv": 0}
        try:
            for key, values in urllib.parse.parse_qs(parts.query, strict_parsing=bool(parts.query)).items():
                value = values[-1]
                if key == "realtime":
                    opts["realtime"] = {"1": True, "0": False}[value]
                elif key == "seconds":
                    opts["seconds"] = _finite(value, 0.0, 86_400.0)
                elif key == "channels":
                    opts["channels"] = {"1": 1, "2": 2}[value]
                elif key == "seed":
                    opts["spec"]["seed"] = int(_finite(value, 0, 2**32 - 1))
                elif key == "rpm":
                    opts["spec"]["speed_rpm"] = _finite(value, 1.0, 200_000.0)
                elif key == "noise":
                    opts["spec"]["noise_scale"] = _finite(value, 0.0, 1000.0)
                elif key == "tach":
                    opts["tach"] = {"none": "none", "chatter": "chatter"}[value]
                elif key == "reset_on_open":
                    opts["reset_on_open"] = {"1": True, "0": False}[value]
                elif key == "aref":
                    opts["aref_mv"] = int(value)
                    if not 500 <= opts["aref_mv"] <= 5500:
                        raise ValueError(value)
                elif key == "bootloader":
                    opts["bootloader"] = {b: b for b in BOOTLOADER_WAIT_S}[value]
                else:
                    raise SerialException(f"{_USAGE}: unknown option {key!r}")
        except (KeyError, ValueError):
            raise SerialException(f"{_USAGE}: bad option in {parts.query!r}") from None
        return name, opts

    def _read_loop(self) -> None:
        assert self._proc is not None and self._proc.stdout is not None
        fd = self._proc.stdout.fileno()
        while True:
            try:
                chunk = os.read(fd, 65536)
            except OSError:
                chunk = b""
            with self._cond:
                if not chunk:
                    self._eof = True
                    self._cond.notify_all()
                    return
                if self._drop_first_frame:  # sent before the port opened: never seen
                    end = chunk.find(b"\x00")
                    if end < 0:
                        continue
                    chunk = chunk[end + 1:]
                    self._drop_first_frame = False
                self._buffer += chunk
                self._cond.notify_all()

    def close(self) -> None:
        with self._cond:
            self._closing = True
            self._cond.notify_all()
        if self._booter is not None:
            self._booter.join(timeout=5)
            self._booter = None
        proc = self._proc
        if proc is None and self._tmpdir is not None:
            self._log.close()  # closed while still in the bootloader: the board never ran
        if proc is not None:
            try:
                if proc.stdin is not None:
                    proc.stdin.close()
            except OSError:
                pass
            try:  # with seconds= the board runs on after stdin closes: ask it to stop
                proc.wait(timeout=0.5)
            except subprocess.TimeoutExpired:
                proc.terminate()  # the harness writes its report and exits
                try:
                    proc.wait(timeout=5)
                except subprocess.TimeoutExpired:
                    proc.kill()
                    proc.wait()
            if self._reader is not None:
                self._reader.join(timeout=2)
            self._log.close()
            try:
                self.report = json.loads(self._report_path.read_text(encoding="utf-8"))
            except (OSError, ValueError):
                self.report = None
            self._proc = None
        if self._tmpdir is not None:
            self._tmpdir.cleanup()
            self._tmpdir = None
        self.is_open = False

    def _reconfigure_port(self) -> None:
        """Baud rate and framing have no meaning for the emulated UART link."""

    # --- data -------------------------------------------------------------------------------

    @property
    def in_waiting(self) -> int:
        with self._cond:
            return len(self._buffer)

    @property
    def finished(self) -> bool:
        """True once the emulated board has stopped (``seconds=`` reached) and all is read."""
        with self._cond:
            return self._eof and not self._buffer

    def read(self, size: int = 1) -> bytes:
        if not self.is_open:
            raise PortNotOpenError()
        timeout = self.timeout
        deadline = None if timeout is None else time.monotonic() + timeout
        with self._cond:
            while len(self._buffer) < size and not self._eof:
                remaining = None if deadline is None else deadline - time.monotonic()
                if remaining is not None and remaining <= 0:
                    break
                self._cond.wait(remaining)
            data = bytes(self._buffer[:size])
            del self._buffer[:size]
        return data

    def write(self, data: Buffer, /) -> int:
        if not self.is_open:
            raise PortNotOpenError()
        payload = bytes(data)  # as pyserial's to_bytes: any buffer, never text
        with self._cond:
            if self._boot_at is not None:  # the bootloader swallows it and waits again
                self.bootloader_bytes += len(payload)
                self._boot_at = max(self._boot_at, time.monotonic() + self._boot_wait_s)
                self._cond.notify_all()
                return len(payload)
        assert self._proc is not None and self._proc.stdin is not None
        try:
            self._proc.stdin.write(payload)
            self._proc.stdin.flush()
        except (BrokenPipeError, OSError):
            raise SerialException("the emulated board has stopped") from None
        return len(payload)

    def reset_input_buffer(self) -> None:
        with self._cond:
            self._buffer.clear()

    def reset_output_buffer(self) -> None:
        """Nothing is held back on the way to the emulator."""


"""The workspace: machine profiles, job records and saved influence coefficients as YAML files.

Layout (``root`` is the workspace folder)::

    machines/<machine-slug>.yaml               machine profile
    machines/<machine-slug>.coefficients.yaml  saved influence coefficients, one set per speed
    jobs/<job-id>.yaml                         job record (a copy of the profile inside)
    jobs/<job-id>.run-<n>-<sweep>.sweep.yml    the points of a kept sweep (beside its job)

Every file starts with ``schema_version`` and ``kind``. Files written by an older version are
migrated on load (``MIGRATIONS``); files from a newer version are refused with one line.

Every save is atomic: the text goes to a temporary file in the same folder, is flushed and
fsynced, then ``os.replace``-d over the target and the folder is fsynced, so a crash, a yanked
cable or ``kill -9`` leaves either the old file or the new one, never a mix or an empty file.
"""

from __future__ import annotations

import contextlib
import os
import re
import sys
import time
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from trueturn.errors import UserError
from trueturn.files import (  # noqa: F401 - re-exported
    TEMP_PREFIX,
    TEMP_SUFFIX,
    atomic_write_bytes,
    atomic_write_text,
    fsync_directory,
    read_text_file,
)
from trueturn.jobs.profiles import MachineProfile
from trueturn.jobs.records import (
    CoefficientSet,
    JobRecord,
    ModelEntry,
    PendingStep,
    RunEntry,
    SecondStartEntry,
    StopEntry,
    SweepEntry,
    SweepPointsFile,
    UnbalanceEntry,
    VerdictEntry,
    WentOnEntry,
    now_iso,
)
from trueturn.model import RunKind
from trueturn.schema import Migration, SchemaError, from_data, to_data
from trueturn.yamltext import LineDict, dump_yaml_text, load_yaml_text

#: Version of the file format this code writes. Bump it when a stored field changes meaning
#: or name, and add a function to ``MIGRATIONS`` that lifts the previous version by one.
SCHEMA_VERSION = 2


def _renamed(mapping: Any, old: str, new: str) -> None:
    """Rename key ``old`` to ``new`` in a mapping read from a file (its line kept)."""
    if isinstance(mapping, dict) and old in mapping and new not in mapping:
        mapping[new] = mapping.pop(old)
        lines = getattr(mapping, "key_lines", None)
        if lines is not None and old in lines:
            lines[new] = lines.pop(old)


def _machine_1_to_2(data: dict[str, Any]) -> dict[str, Any]:
    """Version 2 names axial positions ``axial_mm`` as readings files and the model do
    (was ``axial_position_mm``; the centre of mass ``cg_axial_mm``) and a plane's removal
    flag ``removal_allowed`` (was ``removal``)."""
    planes, bearings = data.get("planes"), data.get("bearings")
    for plane in planes if isinstance(planes, list) else []:  # else the validator says why
        _renamed(plane, "axial_position_mm", "axial_mm")
        _renamed(plane, "removal", "removal_allowed")
    for bearing in bearings if isinstance(bearings, list) else []:
        _renamed(bearing, "axial_position_mm", "axial_mm")
    _renamed(data, "cg_axial_position_mm", "cg_axial_mm")
    return data


def _job_1_to_2(data: dict[str, Any]) -> dict[str, Any]:
    """A job carries its machine profile: the same renames there."""
    if isinstance(data.get("machine"), dict):
        _machine_1_to_2(data["machine"])
    return data


#: ``MIGRATIONS[kind][n]`` turns the data of a version-``n`` file into version ``n + 1``.
MIGRATIONS: dict[str, dict[int, Migration]] = {
    "machine": {1: _machine_1_to_2}, "job": {1: _job_1_to_2},
    "coefficients": {1: lambda data: data}, "sweep": {1: lambda data: data}}

WORKSPACE_ENV = "TRUETURN_WORKSPACE"


# --------------------------------------------------------------------------------------------
# Atomic files: the one rule for writing a file is in trueturn.files (re-exported here)


def remove_stale_temps(folder: Path, older_than_s: float = 60.0) -> int:
    """Delete temp files left by a save that was killed; return how many went."""
    removed = 0
    now = time.time()
    for temp in folder.glob(f"{TEMP_PREFIX}*{TEMP_SUFFIX}"):
        with contextlib.suppress(OSError):
            if now - temp.stat().st_mtime > older_than_s:
                temp.unlink()
                removed += 1
    return removed


# --------------------------------------------------------------------------------------------
# Documents (schema_version + kind + fields)


@dataclass
class CoefficientFile:
    """All saved coefficient sets of one machine."""

    machine: str = ""
    sets: list[CoefficientSet] = field(default_factory=list)

_KIND_CLASS: dict[str, type] = {
    "machine": MachineProfile,
    "job": JobRecord,
    "coefficients": CoefficientFile,
    "sweep": SweepPointsFile,
}

_HEADERS = {
    "machine": "trueturn machine profile. Angles from the reference mark against rotation.",
    "job": "trueturn job record, saved after every run. Edit with care: the tool checks it.",
    "coefficients": "trueturn saved influence coefficients (amp per gram, phase_deg).",
    "sweep": "trueturn sweep points of one run, kept beside its job file. Keep them together.",
}


def document_text(kind: str, obj: Any) -> str:
    """The YAML text of a document: header comment, ``schema_version``, ``kind``, fields."""
    return _document_text_of_data(kind, to_data(obj))


def _document_text_of_data(kind: str, data: dict[str, Any]) -> str:
    return dump_yaml_text({"schema_version": SCHEMA_VERSION, "kind": kind, **data},
                          header=_HEADERS[kind])


def parse_document(text: str, kind: str, source: str) -> Any:
    """Read document text of ``kind``; migrate older versions; one-line SchemaError on a mistake."""
    data = load_yaml_text(text, source)
    if data is None:
        raise SchemaError(f"{source}:1: the file is empty")
    if not isinstance(data, dict):
        raise SchemaError(f"{source}:1: expected a mapping of fields at the top")
    lines = getattr(data, "key_lines", {})
    version = data.get("schema_version")
    if version is None:
        raise SchemaError(f"{source}:1: schema_version: missing field")
    line = lines.get("schema_version", 1)
    if isinstance(version, bool) or not isinstance(version, int) or version < 1:
        raise SchemaError(f"{source}:{line}: schema_version: must be a whole number from 1")
    if version > SCHEMA_VERSION:
        raise SchemaError(f"{source}:{line}: schema_version: {version} was written by a newer "
                          f"trueturn (this one reads up to {SCHEMA_VERSION}); please upgrade")
    found_kind = data.get("kind")
    if found_kind != kind:
        raise SchemaError(f"{source}:{lines.get('kind', 1)}: kind: expected {kind!r}, "
                          f"got {found_kind!r}")
    body: dict[str, Any] = _keep_lines(data, {k: v for k, v in data.items()
                                              if k not in ("schema_version", "kind")})
    for step in range(version, SCHEMA_VERSION):
        migrate = MIGRATIONS[kind].get(step)
        if migrate is None:
            raise SchemaError(f"{source}:{line}: schema_version: no migration from {step}")
        body = migrate(body)
    return from_data(_KIND_CLASS[kind], body, source)


def _keep_lines(original: Any, body: dict[str, Any]) -> LineDict:
    """``body`` as a LineDict that keeps the original mapping's line numbers."""
    result = LineDict(body)
    result.line = getattr(original, "line", 1)
    result.key_lines = {k: v for k, v in getattr(original, "key_lines", {}).items() if k in body}
    return result


def read_document(path: Path, kind: str) -> Any:
    """Load a document file; a missing or unreadable file is a one-line UserError."""
    return parse_document(read_text_file(path), kind, str(path))


def write_document(path: Path, kind: str, obj: Any) -> Path:
    """Save a document atomically, after the same checks loading applies (never write a
    file that the tool itself would refuse to open)."""
    data = to_data(obj)
    from_data(_KIND_CLASS[kind], data, f"{path} (not saved)")  # the same checks as loading
    return atomic_write_text(path, _document_text_of_data(kind, data))


# --------------------------------------------------------------------------------------------
# Sweep points beside their job (issue #20): written once, so a job's save stays small

SWEEP_POINTS_SUFFIX = ".sweep.yml"  # not *.yaml: never taken for a job in the jobs folder


def sweep_points_name(job_path: Path, run_index: int, kind: str) -> str:
    """The file name, beside the job file ``job_path``, of one kept sweep's points."""
    return f"{job_path.stem}.run-{run_index}-{kind}{SWEEP_POINTS_SUFFIX}"


def _write_sweep_points(job: JobRecord, target: Path) -> None:
    """Write the points of each sweep held in memory whose side file beside ``target`` is
    not there yet (a sweep just kept, a job saved in another folder), atomically and before
    the job that names it, so a job file only ever names side files that were written; each
    is written once, and a later save of the job costs a file check per sweep."""
    for run in job.runs:
        for sw in run.sweeps:
            if not sw.points:
                continue  # its side file could not be read: the job keeps naming it
            name = sweep_points_name(target, run.index, sw.kind)
            if sw.points_file == name and (target.parent / name).is_file():
                continue
            write_document(target.parent / name, "sweep",
                           SweepPointsFile(job.job_id, run.index, sw.kind, sw.points))
            sw.points_file = name


def _as_new(sweeps: list[SweepEntry]) -> list[tuple[SweepEntry, str | None]]:
    """Sweeps handed to the store are new: their points are written (and checked) whatever
    side file an entry copied from another names; returns the names, to put back if the
    save fails."""
    named = [(sw, sw.points_file) for sw in sweeps]
    for sw in sweeps:
        if sw.points:
            sw.points_file = None
    return named


def _named_again(named: list[tuple[SweepEntry, str | None]]) -> None:
    for sw, name in named:
        sw.points_file = name


def _without_kept_points(job: JobRecord) -> JobRecord:
    """``job`` as its file holds it: the points of a sweep kept in a side file left out."""
    if not any(sw.points_file and sw.points for run in job.runs for sw in run.sweeps):
        return job
    runs = [replace(run, sweeps=[replace(sw, points=[]) if sw.points_file else sw
                                 for sw in run.sweeps]) if run.sweeps else run
            for run in job.runs]
    return replace(job, runs=runs)


def _read_sweep_points(job: JobRecord, path: Path) -> None:
    """Fill in the points of each sweep of ``job`` (read from ``path``) from its side file;
    one that cannot be read, or belongs to another job, run or sweep, leaves the sweep
    without points and says why in one line (``points_problem``): the job itself loads."""
    for run in job.runs:
        for sw in run.sweeps:
            if sw.points or sw.points_file is None:
                continue
            side = path.parent / sw.points_file
            try:
                kept: SweepPointsFile = read_document(side, "sweep")
            except UserError as exc:
                sw.points_problem = str(exc)
                continue
            if (kept.job_id, kept.run, kept.sweep) != (job.job_id, run.index, sw.kind):
                sw.points_problem = (f"{side}: holds the {kept.sweep} of run {kept.run} of job "
                                     f"{kept.job_id}, not the {sw.kind} of run {run.index} "
                                     f"of job {job.job_id}")
                continue
            sw.points = kept.points


# --------------------------------------------------------------------------------------------
# Workspace


def default_workspace() -> Path:
    """The platform's per-user data folder for trueturn.

    Linux and others: ``$XDG_DATA_HOME/trueturn`` or ``~/.local/share/trueturn``
    (XDG Base Directory Specification); macOS: ``~/Library/Application Support/trueturn``;
    Windows: ``%APPDATA%\\trueturn``.
    """
    home = Path.home()
    if sys.platform == "win32":
        base = os.environ.get("APPDATA")
        return Path(base) / "trueturn" if base else home / "AppData" / "Roaming" / "trueturn"
    if sys.platform == "darwin":
        return home / "Library" / "Application Support" / "trueturn"
    xdg = os.environ.get("XDG_DATA_HOME")
    if xdg and Path(xdg).is_absolute():
        return Path(xdg) / "trueturn"
    return home / ".local" / "share" / "trueturn"


def resolve_workspace(option: str | os.PathLike[str] | None = None) -> Path:
    """``--workspace`` if given, else ``$TRUETURN_WORKSPACE``, else :func:`default_workspace`."""
    if option:
        return Path(option).expanduser()
    env = os.environ.get(WORKSPACE_ENV)
    if env:
        return Path(env).expanduser()
    return default_workspace()


def slug(name: str) -> str:
    """A file-name-safe form of a machine name: ``'Bench grinder #2'`` -> ``'bench-grinder-2'``."""
    text = re.sub(r"[^a-z0-9]+", "-", name.strip().lower()).strip("-")
    return text or "machine"


_JOB_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,99}$")


@dataclass(frozen=True)
class JobSummary:
    """One line of a machine's history."""

    job_id: str
    created: str
    status: str
    runs: int
    passed: bool | None
    path: Path


class Workspace:
    """Machine profiles, jobs and coefficients under one folder (created on first save).

    A job normally lives in ``jobs/<job-id>.yaml``; a job created at a path of the person's
    choosing (``new_job(..., path=...)``, the app's ``--job FILE``) or loaded from a file
    elsewhere is *held* at that path: every later save of that job object (a run, pending
    hands-on work, closing) goes back to it, with the same checks, rollback and merging.
    """

    def __init__(self, root: str | os.PathLike[str]) -> None:
        self.root = Path(root)
        # id(job) -> (job, path): jobs saved outside jobs/ (the job is kept so the id stays its)
        self._held: dict[int, tuple[JobRecord, Path]] = {}

    @classmethod
    def open(cls, option: str | os.PathLike[str] | None = None) -> Workspace:
        """The workspace chosen by ``--workspace``, the environment or the platform default."""
        return cls(resolve_workspace(option))

    @property
    def machines_dir(self) -> Path:
        return self.root / "machines"

    @property
    def jobs_dir(self) -> Path:
        return self.root / "jobs"

    # machines ------------------------------------------------------------------------------

    def _own_folder(self, target: Path) -> None:
        """Create the workspace's own folder for ``target`` (``machines/`` or ``jobs/``,
        with the workspace above them); a folder the person named is never created."""
        folder = target.parent
        if folder not in (self.machines_dir, self.jobs_dir) or folder.is_dir():
            return
        try:
            folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise UserError(f"cannot use the workspace {self.root}: cannot create {folder} "
                            f"({exc.strerror or exc})") from None

    def machine_path(self, name: str) -> Path:
        return self.machines_dir / f"{slug(name)}.yaml"

    def save_machine(self, profile: MachineProfile) -> Path:
        path = self.machine_path(profile.name)
        self._own_folder(path)
        return write_document(path, "machine", profile)

    def load_machine(self, name: str) -> MachineProfile:
        path = self.machine_path(name)
        if not path.exists():
            raise UserError(f"no machine called {name!r} in {self.machines_dir}")
        return read_document(path, "machine")

    def machine_names(self) -> list[str]:
        """Names of the saved machines (read from their files), sorted."""
        names = []
        for path in sorted(self.machines_dir.glob("*.yaml")):
            if path.name.endswith(".coefficients.yaml"):
                continue
            names.append(read_document(path, "machine").name)
        return sorted(names)

    # jobs ---------------------------------------------------------------------------------

    def job_path(self, job_id: str) -> Path:
        if not _JOB_ID.match(job_id):
            raise UserError(f"{job_id!r} is not a job id (letters, digits, '.', '_', '-')")
        return self.jobs_dir / f"{job_id}.yaml"

    def new_job(self, profile: MachineProfile, *, method: str = "single-plane",
                speed_rpm: float | None = None, operator: str = "", customer: str = "",
                notes: str = "", when: str | None = None,
                path: str | os.PathLike[str] | None = None) -> JobRecord:
        """Create, save and return a new open job for ``profile``.

        Without ``path`` it gets a fresh id in the workspace's jobs folder; with ``path`` it
        is named after the file (its stem), held there, and an existing file is never
        overwritten.
        """
        created = when or now_iso()
        if path is not None:
            target = Path(path)
            if target.exists():
                raise UserError(f"{target} exists: a new job never overwrites a file; "
                                "give a new name")
            job_id = target.stem
        else:
            stem = f"{created[:10]}-{slug(profile.name)}"
            number = 1
            while self.job_path(f"{stem}-{number:03d}").exists():
                number += 1
            job_id = f"{stem}-{number:03d}"
        job = JobRecord(job_id=job_id, machine=profile, created=created,
                        updated=created, method=method, speed_rpm=speed_rpm,  # type: ignore[arg-type]
                        operator=operator, customer=customer, notes=notes)
        self.save_job(job, path)
        if path is not None:
            self._held[id(job)] = (job, Path(path))
        return job

    def path_of(self, job: JobRecord) -> Path:
        """Where ``job`` is saved: the file it is held at, else ``jobs/<job-id>.yaml``."""
        held = self._held.get(id(job))
        if held is not None and held[0] is job:
            return held[1]
        return self.job_path(job.job_id)

    def save_job(self, job: JobRecord, path: str | os.PathLike[str] | None = None) -> Path:
        """Save ``job`` atomically (call after every run and every hands-on step) to ``path``,
        else where it is held (:meth:`path_of`); if the save fails, ``job`` is unchanged."""
        before = job.updated
        job.updated = now_iso()
        target = Path(path) if path is not None else self.path_of(job)
        named = [(sw, sw.points_file) for run in job.runs for sw in run.sweeps]
        try:
            self._own_folder(target)
            _write_sweep_points(job, target)
            written = write_document(target, "job", _without_kept_points(job))
        except BaseException:
            job.updated = before
            for sw, name in named:
                sw.points_file = name
            raise
        remove_stale_temps(target.parent)
        return written

    def find_job(self, ref: str | os.PathLike[str]) -> Path:
        """A job file from a path or a job id in this workspace."""
        candidate = Path(ref)
        if candidate.suffix in (".yaml", ".yml") or candidate.exists() or os.sep in str(ref):
            if candidate.is_file():
                return candidate
            in_workspace = self.jobs_dir / candidate.name
            if candidate.name == str(ref) and in_workspace.is_file():
                return in_workspace  # a file name as listed in the workspace's jobs folder
            raise UserError(f"{candidate}: no such job file")
        path = self.job_path(str(ref))
        if not path.is_file():
            raise UserError(f"no job {str(ref)!r} in {self.jobs_dir}")
        return path

    def load_job(self, ref: str | os.PathLike[str]) -> JobRecord:
        """Read a job by id or path; a job read from a file outside the jobs folder (or named
        otherwise) is held there, so saving it writes that file back."""
        path = self.find_job(ref)
        job: JobRecord = read_document(path, "job")
        _read_sweep_points(job, path)
        if path.parent.resolve() != self.jobs_dir.resolve() or path.stem != job.job_id:
            self._held[id(job)] = (job, path)
        return job

    def append_run(self, job: JobRecord, run: RunEntry,
                   path: str | os.PathLike[str] | None = None) -> Path:
        """Add a completed run (its pending hands-on work folded in) and save at once.

        If the save fails, ``job`` and ``run`` are left as they were.
        """
        if run.index != job.next_run_index:
            raise ValueError(f"run index {run.index}, expected {job.next_run_index}")
        if job.status != "open":
            raise UserError(f"job {job.job_id} is closed; start a new job to measure again")
        before = (job.pending, job.updated, run.changes, run.confirmations, run.notes,
                  run.events)
        named = _as_new(run.sweeps)
        if job.pending is not None:
            run.changes = job.pending.changes + run.changes
            run.confirmations = job.pending.confirmations + run.confirmations
            run.events = job.pending.events + run.events
            if job.pending.notes:
                run.notes = (job.pending.notes + "\n" + run.notes).strip()
            job.pending = None
        job.runs.append(run)
        try:
            return self.save_job(job, path)
        except BaseException:
            job.runs.pop()
            (job.pending, job.updated, run.changes, run.confirmations, run.notes,
             run.events) = before
            _named_again(named)
            raise

    def record_sweep(self, job: JobRecord, run_index: int, sweep: SweepEntry,
                     path: str | os.PathLike[str] | None = None) -> Path:
        """Keep a coast-down or run-up with the run it followed or led to (issue #20) and
        save at once; a closed job takes it too (the coast-down of its last run ends after
        the verdict was closed, and is a measurement of that run). If the save fails,
        ``job`` is left as it was."""
        if not 1 <= run_index <= len(job.runs):
            raise ValueError(f"run {run_index} is not recorded in job {job.job_id}")
        run = job.runs[run_index - 1]
        before = list(run.sweeps)
        named = _as_new([sweep])
        run.sweeps = [*(s for s in run.sweeps if s.kind != sweep.kind), sweep]
        try:
            return self.save_job(job, path)
        except BaseException:
            run.sweeps = before
            _named_again(named)
            raise

    def record_pending(self, job: JobRecord, pending: PendingStep,
                       path: str | os.PathLike[str] | None = None) -> Path:
        """Keep hands-on work done since the last run (so a crash does not forget a trial
        weight): ``pending`` replaces the job's pending step. If the save fails, ``job`` is
        left as it was."""
        return self._save_with(job, path, pending=pending)

    def close_job(self, job: JobRecord, verdict: VerdictEntry | None = None,
                  path: str | os.PathLike[str] | None = None) -> Path:
        """Close ``job`` with ``verdict`` and save it; if the save fails, it stays open."""
        return self._save_with(job, path, verdict=job.verdict if verdict is None else verdict,
                               status="closed")

    def record_second_start(self, job: JobRecord, second: SecondStartEntry,
                            unbalance: UnbalanceEntry | None,
                            path: str | os.PathLike[str] | None = None) -> Path:
        """Keep a second start of the machine as found with the as-found run (run 1), and
        the unbalance judgement over both starts; if the save fails, ``job`` is left as it
        was."""
        if not job.runs or job.runs[0].kind != RunKind.AS_FOUND:
            raise ValueError("a second start belongs to the as-found run (run 1)")
        if job.status != "open":
            raise UserError(f"job {job.job_id} is closed; start a new job to measure again")
        first = job.runs[0]
        before = (first.second_start, first.unbalance)
        first.second_start, first.unbalance = second, unbalance or first.unbalance
        try:
            return self.save_job(job, path)
        except BaseException:
            first.second_start, first.unbalance = before
            raise

    def stop_job(self, job: JobRecord, stop: StopEntry,
                 path: str | os.PathLike[str] | None = None) -> Path:
        """Close ``job`` without a verdict, by the person's choice, keeping why; if the save
        fails, it stays open."""
        return self._save_with(job, path, stopped=stop, status="closed")

    def record_model(self, job: JobRecord, model: ModelEntry,
                     path: str | os.PathLike[str] | None = None) -> Path:
        """Keep the model's answer, or its latest refinement (model-first, issue #20 item 4):
        ``model`` replaces the job's; saved at once. If the save fails, ``job`` is left as
        it was."""
        if job.status != "open":
            raise UserError(f"job {job.job_id} is closed; its model is kept as it was")
        return self._save_with(job, path, model=model)

    def record_went_on(self, job: JobRecord, went_on: WentOnEntry,
                       path: str | os.PathLike[str] | None = None) -> Path:
        """Keep that the person went on although balancing may not help (issue #22), so a
        continued job does not ask again; saved at once. If the save fails, ``job`` is left
        as it was."""
        return self._save_with(job, path, went_on=went_on)

    def _save_with(self, job: JobRecord, path: str | os.PathLike[str] | None,
                   **fields: object) -> Path:
        """Set ``fields`` on ``job`` and save it; if the save fails (or is interrupted),
        every field is put back as it was, so the job in memory matches the file."""
        before = {name: getattr(job, name) for name in fields}
        for name, value in fields.items():
            setattr(job, name, value)
        try:
            return self.save_job(job, path)
        except BaseException:
            for name, value in before.items():
                setattr(job, name, value)
            raise

    def resume_job(self, ref: str | os.PathLike[str]) -> JobRecord:
        """Reload an open job after an unplug or crash; it continues at ``next_run_index``."""
        job = self.load_job(ref)
        if job.status != "open":
            raise UserError(f"job {job.job_id} is closed; nothing to resume")
        return job

    def scan_jobs(self, machine_name: str | None = None
                  ) -> tuple[list[JobSummary], list[tuple[Path, str]]]:
        """The jobs in the workspace (of one machine with ``machine_name``), oldest first,
        and the files that could not be read with why, so one bad file never hides the
        others. A symbolic link is not followed (listed as not read): the listing shows
        only what the jobs folder itself holds."""
        wanted = slug(machine_name) if machine_name is not None else None
        found: list[JobSummary] = []
        unreadable: list[tuple[Path, str]] = []
        try:
            paths = sorted(self.jobs_dir.glob("*.yaml"))  # not the sweeps' *.sweep.yml
        except OSError as exc:
            raise UserError(f"cannot list {self.jobs_dir}: {exc.strerror or exc}") from None
        for path in paths:
            if path.is_symlink():
                unreadable.append((path, "a symbolic link (not followed)"))
                continue
            try:
                job: JobRecord = read_document(path, "job")
            except UserError as exc:
                unreadable.append((path, str(exc)))
                continue
            if wanted is None or slug(job.machine.name) == wanted:
                found.append(JobSummary(job.job_id, job.created, job.status, len(job.runs),
                                        job.verdict.passed if job.verdict else None, path))
        return sorted(found, key=lambda s: (s.created, s.job_id)), unreadable

    def job_summaries(self) -> list[JobSummary]:
        """Every readable job in the workspace, oldest first (see :meth:`scan_jobs`)."""
        return self.scan_jobs()[0]

    def history(self, machine_name: str) -> list[JobSummary]:
        """The readable jobs of one machine, oldest first."""
        return self.scan_jobs(machine_name)[0]

    # influence coefficients -----------------------------------------------------------------

    def coefficients_path(self, machine_name: str) -> Path:
        return self.machines_dir / f"{slug(machine_name)}.coefficients.yaml"

    def load_coefficient_file(self, machine_name: str) -> CoefficientFile:
        path = self.coefficients_path(machine_name)
        if not path.exists():
            return CoefficientFile(machine=machine_name, sets=[])
        return read_document(path, "coefficients")

    def save_coefficients(self, machine_name: str, coefficients: CoefficientSet,
                          same_speed_pct: float = 2.0) -> Path:
        """Keep ``coefficients`` for the machine, replacing a set within ``same_speed_pct`` %."""
        stored = self.load_coefficient_file(machine_name)
        kept = [s for s in stored.sets
                if abs(s.speed_rpm - coefficients.speed_rpm) > same_speed_pct / 100 * s.speed_rpm]
        kept.append(coefficients)
        kept.sort(key=lambda s: s.speed_rpm)
        self._own_folder(self.coefficients_path(machine_name))
        return write_document(self.coefficients_path(machine_name), "coefficients",
                              CoefficientFile(machine=machine_name, sets=kept))

    def find_coefficients(self, machine_name: str, speed_rpm: float,
                          tolerance_pct: float = 5.0) -> CoefficientSet | None:
        """The saved set nearest ``speed_rpm`` if within ``tolerance_pct`` %, else None.

        Influence coefficients change with speed (common practice, no source), so a set is
        only offered for a trim at about the speed it was measured at.
        """
        sets = self.load_coefficient_file(machine_name).sets
        if not sets:
            return None
        best = min(sets, key=lambda s: abs(s.speed_rpm - speed_rpm))
        if abs(best.speed_rpm - speed_rpm) > tolerance_pct / 100 * best.speed_rpm:
            return None
        return best


"""Starting the app from the command line: choose the port and the machine profile."""

from __future__ import annotations

import os
from pathlib import Path

from trueturn.errors import UserError
from trueturn.files import check_output
from trueturn.jobs.profiles import MachineProfile
from trueturn.jobs.store import Workspace
from trueturn.link.ports import list_board_ports
from trueturn.ui.app import AppConfig, TrueturnApp
from trueturn.ui.resume import refuse_changed_profile


def scenario_profile(name: str) -> MachineProfile:
    """The machine profile of a simulated rig's scenario."""
    from trueturn.sim.scenario import load_scenario
    from trueturn.ui.machine import profile_from_scenario

    return profile_from_scenario(load_scenario(name))


def _run(config: AppConfig) -> int:
    app = TrueturnApp(config)
    app.run()
    return app.return_code or 0  # 1: the job could not be saved, or the app failed


def launch_sim(scenario: str, workspace: str | Path | None = None, pace: float = 1.0,
               demo: bool = True) -> int:
    """The app on ``sim://SCENARIO`` with the motor off at power-up."""
    if not 0.01 <= pace <= 1000:  # as sim://...?pace= takes it; nan and inf refused too
        raise UserError(f"--pace must be 0.01 to 1000, got {pace:g}")
    profile = scenario_profile(scenario)
    url = f"sim://{scenario}?motor=off" + (f"&pace={pace:g}" if pace != 1.0 else "")
    return _run(AppConfig(url, profile, demo=demo,
                          workspace=Path(workspace) if workspace else None))


def _scheme(url: str) -> str | None:
    return url.split("://", 1)[0] if "://" in url else None


def choose_profile(port: str, job: str | None, machine: str | None,
                   workspace: str | None) -> MachineProfile:
    """The machine: --machine, the virtual rig's scenario, or the only one saved."""
    del job
    ws = Workspace.open(workspace)
    if machine is not None:
        return ws.load_machine(machine)
    if _scheme(port) in ("sim", "emu"):
        return scenario_profile(port.split("://", 1)[1].split("?", 1)[0])
    names = ws.machine_names() if ws.machines_dir.is_dir() else []
    if len(names) == 1:
        return ws.load_machine(names[0])
    if not names:
        raise UserError(f"no machine profile in {ws.machines_dir}: save one there first "
                        "(copy and edit a demo machine file) or give --job FILE")
    raise UserError(f"several machines saved ({', '.join(names)}): choose one with --machine")


def launch_port(port: str | None, job: str | None = None, machine: str | None = None,
                workspace: str | None = None) -> int:
    """The app on a real board (auto-detected when ``port`` is None) or a virtual rig."""
    if port is None:
        found = [p for p in list_board_ports() if p.likely_board]
        if not found:
            raise UserError("no board found on any USB serial port: plug it in, or give "
                            "--port (try: trueturn ports), or try: trueturn demo")
        port = found[0].device
    scheme = _scheme(port)
    if job is not None and os.path.lexists(job):
        profile, note = resume_profile(port, job, machine, workspace)
        return _run(AppConfig(port, profile, demo=scheme == "sim",
                              workspace=Path(workspace) if workspace else None,
                              job_file=Path(job), resume_job=Path(job), start_note=note))
    if job is not None:
        check_output(job)  # the one rule for files: its folder exists, a regular name
    profile = choose_profile(port, job, machine, workspace)
    return _run(AppConfig(port, profile, demo=scheme == "sim",
                          workspace=Path(workspace) if workspace else None,
                          job_file=Path(job) if job else None))


def resume_profile(port: str, job_file: str, machine: str | None,
                   workspace: str | None) -> tuple[MachineProfile, str]:
    """The machine to continue an existing job file on, and what to say about it.

    The job carries the profile it was started with. The machine as saved now (``--machine``,
    the virtual rig's scenario, or the workspace's machine of the job's name) must be that
    profile: a changed one is refused, naming what changed. A machine no longer saved is
    continued with the job's own copy, said once. A closed job is refused in one line.
    """
    if not os.path.isfile(job_file):
        raise UserError(f"{job_file} is not a job file (a regular file)")
    ws = Workspace.open(workspace)
    job = ws.resume_job(job_file)  # one line for a closed job or a file it cannot read
    if machine is not None:
        refuse_changed_profile(job, ws.load_machine(machine), f"machine {machine!r}")
        return job.machine, ""
    if _scheme(port) in ("sim", "emu"):
        name = port.split("://", 1)[1].split("?", 1)[0]
        refuse_changed_profile(job, scenario_profile(name), f"the virtual rig {name!r}")
        return job.machine, ""
    if ws.machine_path(job.machine.name).is_file():
        refuse_changed_profile(job, ws.load_machine(job.machine.name),
                               f"machine {job.machine.name!r} in {ws.machines_dir}")
        return job.machine, ""
    return job.machine, (f"Machine {job.machine.name!r} is not saved in {ws.machines_dir}: "
                         "the job continues with the profile it was started with.")

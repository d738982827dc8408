"""Demo mode: mirror the operator's confirmed hands-on work onto the simulated rig.

When the person confirms a weight on a ``sim://`` rig, the same weight goes onto the
simulated rotor through the rig API (``port.rig``: add_mass, remove_mass, motor_start,
motor_stop), so the demo's residual is the physics' honest answer, not a scripted one.
Removed material goes on as its equivalent addition (``PlacedMass.as_addition``: the same
mass opposite the drilled spot), the one removal rule.
"""

from __future__ import annotations

from trueturn.model import PlacedMass
from trueturn.procedure.guide import MassChange, Procedure
from trueturn.sim.rotor import Mass
from trueturn.ui.session import LinkSession


def rig_mass(m: PlacedMass) -> Mass:
    added = m.as_addition()
    return Mass(added.plane, added.mass_g, added.angle_deg)


class DemoRig:
    """The simulated rig behind the session's ``sim://`` port."""

    def __init__(self, session: LinkSession) -> None:
        self.session = session

    def apply(self, changes: tuple[MassChange, ...], proc: Procedure | None = None) -> None:
        """Put the confirmed changes onto the simulated rotor."""
        del proc
        for change in changes:
            if change.mass is None:
                continue
            if change.action == "attach":
                self.session.rig_call("add_mass", rig_mass(change.mass))
            elif change.action == "detach":
                self.session.rig_call("remove_mass", rig_mass(change.mass))

    def motor(self, on: bool) -> None:
        self.session.rig_call("motor_start" if on else "motor_stop")

    def taps(self, on: bool) -> None:
        """The demo's stand-in for a person tapping the housings (a tap test), or not."""
        self.session.rig_call("tap_test", on)

    def carry_over(self, old_rig: object) -> None:
        """A reopened ``sim://`` port is a fresh virtual board: give it the rotor as it was
        (the weights the person put on, the motor on or off) - a pulled cable changes
        nothing on a real machine."""
        for mass in getattr(old_rig, "masses", []):
            self.session.rig_call("add_mass", mass)
        if getattr(old_rig, "running", False):
            self.session.rig_call("motor_start")

    def masses(self) -> list[Mass]:
        return list(self.session.rig_call("all_masses"))

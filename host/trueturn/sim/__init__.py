"""Virtual rigs: rotor physics, invented demo machines, and a simulated board (``sim://``).

* :mod:`trueturn.sim.rotor`: rigid rotor on two bearings, exact steady 1x response.
* :mod:`trueturn.sim.transient`: the same rotor integrated in time (run-up, coast-down).
* :mod:`trueturn.sim.scenario`: the invented machines (YAML), ``load_scenario``.
* :mod:`trueturn.sim.board`: the virtual board speaking protocol v1.
* :mod:`trueturn.sim.spec`: exact 1x in board units, and ``signal_spec`` for the emulator.
"""

from trueturn.sim.rotor import CorrectionPlane, Mass, PickupMount, RigidRotor, Support
from trueturn.sim.scenario import Scenario, list_scenarios, load_scenario
from trueturn.sim.spec import Exact1x, describe, exact_1x, signal_spec

__all__ = ["CorrectionPlane", "Support", "Exact1x", "Mass", "PickupMount", "RigidRotor", "Scenario",
           "describe", "exact_1x", "list_scenarios", "load_scenario", "signal_spec"]

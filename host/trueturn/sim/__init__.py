"""Virtual rigs: rotor physics, invented demo machines, and a simulated board (``sim://``)."""

from trueturn.sim.rotor import Bearing, CorrectionPlane, Mass, Pickup, RigidRotor

__all__ = ["Bearing", "CorrectionPlane", "Mass", "Pickup", "RigidRotor"]

"""The virtual serial port that the simulator's URL handlers (``trueturn.sim.handlers``) build on."""

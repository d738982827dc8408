"""pyserial URL handlers of the simulated and the emulated board: ``sim://`` (``protocol_sim``,
the Python board model) and ``emu://`` (``protocol_emu``, the real firmware in simavr).
Registered by name in :func:`trueturn.link.ports.register_url_handlers`, so link never
imports the simulator."""

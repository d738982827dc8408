"""The balancing procedure's layer: pure rules of the guided job (no Textual, no I/O).

``standstill``: standstill proven by independent evidence (board data, tach, pickups).
"""

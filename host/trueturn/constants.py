"""Physical and unit constants shared by every layer, defined once.

The board's tick rate and the other protocol limits are not here: they are data of the
protocol catalogue (``trueturn.link.catalogue``, ``limits``), shared with the firmware.
"""

from __future__ import annotations

#: Standard acceleration of gravity, m/s^2 (3rd CGPM, 1901: a conventional, exact value).
STANDARD_GRAVITY_M_S2 = 9.80665
#: Millimetres per inch (exact, international yard and pound agreement, 1959).
MM_PER_INCH = 25.4
#: Micrometres per mil (1 mil = 0.001 in, exact).
UM_PER_MIL = 25.4

#: Two speeds further apart than this fraction give 1x readings that cannot be compared as
#: "the same speed": the unbalance response goes as speed^p with p about 2...4 (rotating
#: unbalance, forced response of a single-degree-of-freedom system, from memory: any
#: vibration textbook), so 0.3 % moves the 1x by 0.6...1.2 %, about the resolution of a good
#: reading. Used between runs (balance.speed) and between the halves of one run (dsp).
SPEED_MATCH_FRACTION = 0.003

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

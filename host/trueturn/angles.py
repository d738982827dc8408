"""The one angle convention of trueturn (README, "Angles").

* Positions on the rotor and weight angles are counted in degrees, 0-360, from the
  reference mark AGAINST the direction of rotation, i.e. in the order the points pass a
  fixed pickup after the mark passes it.
* Phase is the lag, in degrees 0-360, of the 1x positive peak after the tach event.
* Inside the math a 1x reading is the complex phasor ``A * exp(1j * radians(phase))`` and a
  mass is ``m * exp(1j * radians(angle))``; with both counted the same way, a heavy spot at
  angle theta produces a phasor whose phase is theta plus a constant system lag.

Users whose rotor is numbered the other way (with rotation) choose that at the edge with
:func:`from_user_angle_deg` / :func:`to_user_angle_deg`; never inside the math.

Pictures (the app's live polar plot, the report's plots, the printed ring) all place an angle
with :func:`screen_xy`: the plane drawn as the person sees it from the side they look at it
from (the machine's front for a machine profile, a plane's face for the placement picture
(:func:`seen_rotation`), the printed side for a ring), 0 deg (the
reference mark) at the top, angles growing against rotation. A rotor that turns clockwise as
seen therefore has its angles growing counter-clockwise on the picture: 90 deg on the left.
"""

from __future__ import annotations

import math
from typing import Literal

import numpy as np

Numbering = Literal["against", "with"]
#: Direction of rotation as seen by the person looking at the picture's side of the plane.
Rotation = Literal["cw", "ccw"]
#: The end of the machine a correction plane's face is looked at (and its ring laid on)
#: from: the ``front``, where a machine profile's rotation is seen, or the ``back``.
Face = Literal["front", "back"]


def wrap_deg(angle_deg: float) -> float:
    """Angle folded into [0, 360)."""
    wrapped = math.fmod(angle_deg, 360.0)
    if wrapped < 0:
        wrapped += 360.0
    return 0.0 if wrapped >= 360.0 else wrapped


def phasor(amplitude: float, phase_deg: float) -> complex:
    """``amplitude * exp(i * phase)`` with the phase in degrees."""
    return complex(amplitude * math.cos(math.radians(phase_deg)),
                   amplitude * math.sin(math.radians(phase_deg)))


def amplitude_phase(value: complex) -> tuple[float, float]:
    """(amplitude, phase_deg in [0, 360)) of a phasor."""
    return abs(value), wrap_deg(math.degrees(math.atan2(value.imag, value.real)))


def phasors(amplitudes: np.ndarray, phases_deg: np.ndarray) -> np.ndarray:
    """Vectorised :func:`phasor`."""
    return np.asarray(amplitudes) * np.exp(1j * np.radians(phases_deg))


def angle_difference_deg(a_deg: float, b_deg: float) -> float:
    """Signed smallest difference ``a - b`` in (-180, 180]."""
    diff = wrap_deg(a_deg - b_deg)
    return diff - 360.0 if diff > 180.0 else diff


def from_user_angle_deg(user_angle_deg: float, numbering: Numbering = "against") -> float:
    """Convert an angle as the person reads it on their rotor to the internal convention."""
    return wrap_deg(user_angle_deg if numbering == "against" else -user_angle_deg)


def to_user_angle_deg(angle_deg: float, numbering: Numbering = "against") -> float:
    """Convert an internal angle to the numbering the person uses on their rotor."""
    return from_user_angle_deg(angle_deg, numbering)


def seen_rotation(rotation: Rotation, face: Face) -> Rotation:
    """The direction of rotation as seen looking at a plane's ``face``.

    Parameters
    ----------
    rotation : {"cw", "ccw"}
        Direction of rotation as seen from the machine's front (a machine profile's).
    face : {"front", "back"}
        The end the plane is looked at from.

    Returns
    -------
    {"cw", "ccw"}
        ``rotation`` from the front; the other way from the back: looking along the shaft
        from the opposite end mirrors the picture, so a turn that is clockwise from one end
        is counter-clockwise from the other (elementary geometry).

    Notes
    -----
    Angles themselves do not change with the side (they count from the mark against
    rotation, the order points pass a fixed pickup); only the picture mirrors. Give
    :func:`screen_xy` this rotation to draw a plane as seen from its face.
    """
    if face not in ("front", "back"):
        raise ValueError(f"face must be 'front' or 'back', got {face!r}")
    if rotation not in ("cw", "ccw"):
        raise ValueError(f"rotation must be 'cw' or 'ccw', got {rotation!r}")
    if face == "front":
        return rotation
    return "ccw" if rotation == "cw" else "cw"


def screen_xy(angle_deg: float, rotation: Rotation) -> tuple[float, float]:
    """Where ``angle_deg`` goes on a picture of the plane: a point on the unit circle.

    Parameters
    ----------
    angle_deg : float
        Angle from the reference mark, degrees against rotation (the one convention).
    rotation : {"cw", "ccw"}
        Direction of rotation as seen from the side the picture shows.

    Returns
    -------
    (x, y) : tuple of float
        Screen coordinates on the unit circle with **x to the right and y down** (SVG user
        units, terminal columns and rows): 0 deg is at the top, ``(0, -1)``; for a clockwise
        rotor 90 deg is on the left, ``(-1, 0)``, for a counter-clockwise one on the right.
        Scale by a radius and add the centre to draw.

    Notes
    -----
    Angles count in the order points pass a fixed pickup after the mark, i.e. against the
    motion of the rim: on a picture of a clockwise rotor they advance counter-clockwise.
    """
    if rotation not in ("cw", "ccw"):
        raise ValueError(f"rotation must be 'cw' or 'ccw', got {rotation!r}")
    a = math.radians(angle_deg)
    sign = -1.0 if rotation == "cw" else 1.0
    return sign * math.sin(a), -math.cos(a)

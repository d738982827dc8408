"""Static/couple decomposition of a two-plane unbalance (or correction).

With plane unbalances U1, U2 (complex, g·mm): the static part is the resultant
``S = U1 + U2`` (shared half per plane), the couple part is ``±(U1 - U2) / 2`` (equal and
opposite in the two planes), so that ``U1 = S/2 + K`` and ``U2 = S/2 - K``. Standard
decomposition (e.g. ISO 21940-2 vocabulary: static, couple and dynamic unbalance).
"""

from __future__ import annotations

from dataclasses import dataclass

from trueturn.angles import amplitude_phase


@dataclass(frozen=True)
class StaticCouple:
    """Resultant static unbalance and the couple pair (first plane's half; second opposite)."""

    static_gmm: float
    static_angle_deg: float
    couple_gmm: float            # in each plane
    couple_angle_deg: float      # in the first plane; the second plane is 180° opposite


def static_couple(first_gmm: complex, second_gmm: complex) -> StaticCouple:
    """Split two plane unbalance vectors into the static resultant and the couple pair.

    Parameters
    ----------
    first_gmm : complex
        Unbalance (or correction) in the first plane as a phasor, g·mm (magnitude, and angle
        in the :mod:`trueturn.angles` convention).
    second_gmm : complex
        The same in the second plane, g·mm.

    Returns
    -------
    StaticCouple
        The static resultant ``S = U1 + U2`` (g·mm and degrees) and the couple ``K = (U1 - U2)
        / 2`` in the first plane (g·mm and degrees; the second plane carries ``-K``), so that
        ``U1 = S/2 + K`` and ``U2 = S/2 - K``.

    References
    ----------
    .. [1] ISO 21940-2, Mechanical vibration -- Rotor balancing -- Part 2: Vocabulary
       (static, couple and dynamic unbalance; title and edition from memory).
    """
    s, s_angle = amplitude_phase(first_gmm + second_gmm)
    k, k_angle = amplitude_phase((first_gmm - second_gmm) / 2)
    return StaticCouple(s, s_angle, k, k_angle)

"""What balancing answers: corrections, and the ISO 21940-11 verdict."""

from __future__ import annotations

from dataclasses import dataclass, replace
from enum import Enum

from trueturn.angles import phasor


@dataclass(frozen=True)
class Correction:
    """Mass to add at ``angle_deg`` in ``plane`` (at its ``radius_mm``); the ± values are
    95 % half-widths when known. To remove material instead, see
    :meth:`trueturn.model.PlacedMass.as_addition` (the same mass taken out opposite)."""

    plane: str
    mass_g: float
    angle_deg: float
    radius_mm: float | None = None
    mass_g_pm: float | None = None
    angle_deg_pm: float | None = None

    @property
    def vector_g(self) -> complex:
        return phasor(self.mass_g, self.angle_deg)


class TolerancePlanes(str, Enum):
    """Where residual unbalance was compared with its permissible share."""

    BEARINGS = "bearings"                    # ISO 21940-11 reference planes (clause 4)
    CORRECTION_PLANES = "correction planes"  # bearing positions unknown: planes as given


class PlaneArrangement(str, Enum):
    """Correction planes relative to the two bearings."""

    INBOARD = "inboard"      # every correction plane between the bearings (or on one)
    OUTBOARD = "outboard"    # planes outside the bearings, on both sides
    OVERHUNG = "overhung"    # planes outside the bearings, all on one side
    MIXED = "mixed"          # some planes between the bearings, some outside


class VerdictFlag(str, Enum):
    """Facts about a verdict that the person must be told (put into words by ui/cli)."""

    #: bearing positions unknown: residuals compared in the correction planes themselves
    NOT_AT_BEARINGS = "not_at_bearings"
    #: residual angles unknown: the bearing loads are the worst case (magnitudes added)
    WORST_CASE_PHASING = "worst_case_phasing"
    #: centre of mass outside the bearings: shares limited to 0.3/0.7 (see module notes)
    CG_OUTSIDE_BEARINGS = "cg_outside_bearings"
    #: centre of mass not given: taken midway between the bearings (half each)
    CG_ASSUMED_MIDWAY = "cg_assumed_midway"
    #: no maximum service speed given: the grade was judged at the last run's speed
    SPEED_FROM_LAST_RUN = "speed_from_last_run"
    #: the answer is ambiguous (amplitude-only): no PASS can be given
    AMBIGUOUS = "ambiguous"
    #: the amplitudes do not fit one answer (amplitude-only): no PASS can be given
    INCONSISTENT = "inconsistent"
    #: the run judged has a clipped reading (reads low): no PASS can be given
    CLIPPED = "clipped"
    #: a pickup's 1x grew beyond both readings' 95 % circles since the as-found run
    WORSE_THAN_AS_FOUND = "worse_than_as_found"
    #: fewer planes corrected than the machine has: the whole rotor cannot be shown within
    PARTIAL_PLANES = "partial_planes"
    #: the estimate is within, but the residual's 95 % upper bound reaches past the
    #: allowance: conformance not proven (ISO 14253-1 decision rule, from memory)
    NOT_PROVEN = "not_proven"


#: flags that withhold a pass whatever the residuals say
WITHHOLDING_FLAGS = frozenset({VerdictFlag.AMBIGUOUS, VerdictFlag.INCONSISTENT,
                               VerdictFlag.CLIPPED, VerdictFlag.WORSE_THAN_AS_FOUND,
                               VerdictFlag.PARTIAL_PLANES, VerdictFlag.NOT_PROVEN})


@dataclass(frozen=True)
class Verdict:
    """Residual unbalance (g·mm per tolerance plane) against its share of U_per
    (ISO 21940-11), with the facts that qualify it.

    ``labels`` names the tolerance planes (bearing or correction plane names, or empty);
    ``residual_angle_deg`` is None per plane where only a magnitude is known; ``speed_rpm``
    is the maximum service speed the grade was judged at (None: not stated);
    ``planes_passed``: every residual within its share, before the flags that withhold a
    pass; ``passed``: the verdict as given. A pass needs the residual's 95 % upper bound
    (``residual_upper_gmm``, when known) within the share too: conformance is proven only
    when the measured value and its uncertainty are inside the allowance (the decision rule
    of ISO 14253-1, from memory), so a marginal rotor gets ``not_proven``, never a PASS
    that the true residual would fail. ``worse_pickups``: pickups whose 1x grew since
    the as-found run (flag ``worse_than_as_found``).
    """

    passed: bool
    residual_gmm: tuple[float, ...]
    permissible_gmm: tuple[float, ...]
    labels: tuple[str, ...] = ()
    tolerance_planes: TolerancePlanes = TolerancePlanes.CORRECTION_PLANES
    residual_angle_deg: tuple[float | None, ...] = ()
    arrangement: PlaneArrangement | None = None
    u_per_gmm: float | None = None
    speed_rpm: float | None = None
    flags: tuple[VerdictFlag, ...] = ()
    grade_mm_s: float | None = None
    worse_pickups: tuple[str, ...] = ()
    #: the residual's 95 % upper bound per tolerance plane, g·mm (empty: not known)
    residual_upper_gmm: tuple[float, ...] = ()

    @property
    def planes_passed(self) -> bool:
        return all(r <= p for r, p in zip(self.residual_gmm, self.permissible_gmm, strict=True))

    @property
    def undecided(self) -> bool:
        """Within on the estimate, the pass withheld by its uncertainty alone (flag
        ``not_proven`` and no other withholding flag): a longer average of the run judged
        may prove it, a trim would not (it would correct noise)."""
        return (not self.passed and self.planes_passed
                and VerdictFlag.NOT_PROVEN in self.flags
                and not any(f in WITHHOLDING_FLAGS for f in self.flags
                            if f is not VerdictFlag.NOT_PROVEN))

    @property
    def at_bearings(self) -> bool:
        return self.tolerance_planes is TolerancePlanes.BEARINGS

    @property
    def worst_ratio(self) -> float:
        return max(r / p for r, p in zip(self.residual_gmm, self.permissible_gmm, strict=True))

    def rows(self) -> list[tuple[str, float, float, bool]]:
        """(label, residual g·mm, permissible g·mm, within) per tolerance plane."""
        labels = self.labels or tuple(f"plane {i + 1}" for i in range(len(self.residual_gmm)))
        return [(name, r, p, r <= p) for name, r, p in
                zip(labels, self.residual_gmm, self.permissible_gmm, strict=True)]

    def with_flags(self, *flags: VerdictFlag) -> Verdict:
        """This verdict with more flags; a withholding flag takes the pass away."""
        new = tuple(f for f in flags if f not in self.flags)
        withheld = any(f in WITHHOLDING_FLAGS for f in new)
        return replace(self, flags=(*self.flags, *new), passed=self.passed and not withheld)

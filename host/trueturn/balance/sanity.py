"""No information, no answer: trials that moved the 1x less than its measurement uncertainty,
and corrections no rotor could take.

* A trial carries information only if it changed the 1x by more than the readings can
  resolve. With 95 % confidence radii ``c_before`` and ``c_after`` the change of a reading
  is resolved when it exceeds ``sqrt(c_before^2 + c_after^2)`` (two independent circular
  errors add in quadrature). Without confidence radii a change under 1 % of the level is
  taken as within the repeatability of a 1x reading (common practice, no source).
  A plane whose trial is unresolved on every pickup gets :class:`NoInformationError`
  (a :class:`UserError`, exit 2) naming a larger trial mass.
* A correction is checked against a sanity limit: the plane's ``max_mass_g`` (the engine
  already keeps within it), and the rotor's mass: above 1 % of the rotor mass at the plane's
  radius the correction is flagged loudly, above 10 % it is refused; with no rotor mass
  known, above 100 kg it is refused (common practice, no source: balancing corrections on
  shop rotors are a small fraction of a percent of the rotor's mass).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from enum import Enum

from trueturn.errors import UserError
from trueturn.model.units import MassUnit, mass_text

#: without confidence radii: a change under this fraction of the 1x level is no information
MIN_RESOLVED_CHANGE = 0.01
#: a trial that would need more than this many times its mass shows no change at all
MAX_SUGGESTED_FACTOR = 1000.0
#: correction above this share of the rotor's mass: flagged
LARGE_SHARE_OF_ROTOR = 0.01
#: correction above this share of the rotor's mass: refused
ABSURD_SHARE_OF_ROTOR = 0.10
#: correction above this mass with no rotor mass known: refused (grams)
ABSURD_MASS_G = 1.0e5


class NoInformationError(UserError):
    """A trial moved the 1x less than the readings can resolve: no answer can be given.

    ``plane``: the plane whose trial carried no information; ``trial_g``: its trial mass;
    ``suggested_g``: a trial mass that would be resolved (about 3x the uncertainty), or None
    when the trial showed no change at all.
    """

    def __init__(self, message: str, plane: str, trial_g: float, suggested_g: float | None):
        super().__init__(message)
        self.plane = plane
        self.trial_g = trial_g
        self.suggested_g = suggested_g


class AbsurdCorrectionError(UserError):
    """A correction beyond any sanity limit (refused, exit 2); ``plane`` and ``mass_g``."""

    def __init__(self, message: str, plane: str, mass_g: float):
        super().__init__(message)
        self.plane = plane
        self.mass_g = mass_g


class CorrectionFlag(str, Enum):
    """A correction that is allowed but must be shown loudly."""

    LARGE_SHARE_OF_ROTOR = "large_share_of_rotor"


@dataclass(frozen=True)
class CorrectionFinding:
    """``plane``'s correction ``mass_g`` is ``share`` of the rotor's mass (flag says why)."""

    plane: str
    mass_g: float
    share_of_rotor: float
    flag: CorrectionFlag


def check_trial_information(plane: str, trial_g: float, effects: Sequence[float],
                            levels: Sequence[float], uncertainties: Sequence[float | None],
                            mass_unit: MassUnit = "g") -> None:
    """Refuse a plane whose trial changed the 1x less than the readings resolve, on every pickup.

    A change is resolved when it exceeds the 95 % radius of the change (the readings' own
    radii added in quadrature, computed by the caller); without radii, when it exceeds 1 % of
    the level before the trial.

    Parameters
    ----------
    plane : str
        Name of the plane whose trial is judged.
    trial_g : float
        The trial mass, g; a trial of 0 g or less is not judged.
    effects : sequence of float
        Magnitude of the trial's change of the 1x per pickup, reading units.
    levels : sequence of float
        The 1x level per pickup before the trial, reading units.
    uncertainties : sequence of float or None
        95 % radius of that change per pickup, reading units (None: unknown, then the 1 %
        rule).
    mass_unit : {"g", "oz"}, default "g"
        The unit the refusal names masses in (the person's); the facts stay in grams.

    Raises
    ------
    NoInformationError
        When no pickup resolves the change; it names a trial mass about three times the
        uncertainty (``suggested_g``), or None when the trial changed nothing at all.

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), Evaluation of measurement data -- Guide to the expression of
       uncertainty in measurement: independent uncertainties combine in quadrature.
    .. [2] The 1 % repeatability floor and the factor 3: common practice, no source.
    """
    if trial_g <= 0:
        return
    needed = []
    for effect, level, unc in zip(effects, levels, uncertainties, strict=True):
        floor = unc if unc else MIN_RESOLVED_CHANGE * level
        if effect > floor and effect > 0:
            return
        needed.append(3.0 * floor / effect if effect > 0 and floor > 0 else math.inf)
    factor = min(needed) if needed else math.inf
    if factor <= MAX_SUGGESTED_FACTOR:
        suggested = trial_g * factor
        raise NoInformationError(
            f"plane {plane}: the trial mass ({mass_text(trial_g, mass_unit)}) changed the 1x by "
            f"less than the readings can resolve: no information, no answer; redo the trial "
            f"with about {mass_text(suggested, mass_unit)}", plane, trial_g, suggested)
    raise NoInformationError(
        f"plane {plane}: the trial mass ({mass_text(trial_g, mass_unit)}) did not change the "
        "1x at all: is it "
        "on the rotor, and in the plane named?", plane, trial_g, None)


def check_corrections(masses_g: Sequence[float], planes: Sequence[str],
                      rotor_mass_kg: float | None) -> list[CorrectionFinding]:
    """Refuse absurd corrections; flag large ones.

    Parameters
    ----------
    masses_g : sequence of float
        Correction mass per plane, g.
    planes : sequence of str
        The planes' names, same order.
    rotor_mass_kg : float or None
        Mass of the rotor, kg; None when unknown (then only the 100 kg limit applies).

    Returns
    -------
    list of CorrectionFinding
        Corrections above 1 % of the rotor's mass, flagged ``large_share_of_rotor``.

    Raises
    ------
    AbsurdCorrectionError
        When a correction is not finite, above 10 % of the rotor's mass, or above 100 kg with
        no rotor mass known.

    References
    ----------
    .. [1] The 1 % and 10 % limits: common practice, no source.
    """
    findings = []
    for plane, mass_g in zip(planes, masses_g, strict=True):
        if not math.isfinite(mass_g):
            raise AbsurdCorrectionError(f"plane {plane}: the correction is not a finite number; "
                                        "the runs or coefficients carry no information",
                                        plane, mass_g)
        if rotor_mass_kg is None:
            if mass_g > ABSURD_MASS_G:
                raise AbsurdCorrectionError(
                    f"plane {plane}: a correction of {mass_g:.4g} g is beyond any sanity limit; "
                    "check the trial runs or saved coefficients", plane, mass_g)
            continue
        share = mass_g / (1000.0 * rotor_mass_kg)
        if share > ABSURD_SHARE_OF_ROTOR:
            raise AbsurdCorrectionError(
                f"plane {plane}: a correction of {mass_g:.4g} g is {100 * share:.3g} % of the "
                f"rotor's mass (refused above {100 * ABSURD_SHARE_OF_ROTOR:g} %); check the "
                "trial runs or saved coefficients", plane, mass_g)
        if share > LARGE_SHARE_OF_ROTOR:
            findings.append(CorrectionFinding(plane, mass_g, share,
                                              CorrectionFlag.LARGE_SHARE_OF_ROTOR))
    return findings

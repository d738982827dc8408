"""Rigid rotor on two flexible bearings: exact steady-state 1x response to unbalance.

Model (the classic rigid-rotor / soft-bearing model of balancing texts; from memory:
Den Hartog, *Mechanical Vibrations*, rotating unbalance; Vance, *Rotordynamics of
Turbomachinery*, rigid rotor on flexible supports):

* four degrees of freedom: translation of the centre of mass (x horizontal, y vertical) and
  the two small tilts ``a = dx/dz``, ``b = dy/dz``; a section at axial distance ``d`` from the
  centre of mass moves by ``x + a*d``, ``y + b*d``;
* bearings are springs and dashpots, stiffness and damping may differ horizontally and
  vertically (an anisotropic support gives elliptical orbits);
* gyroscopic coupling of the tilts by the polar moment of inertia (``Ip*Omega``);
* unbalance masses ``m`` at radius ``r`` in a plane at axial position ``z`` give a rotating
  force ``m*r*omega^2`` and a moment about the centre of mass.

The equations are solved exactly in the frequency domain (one complex 4x4 linear solve per
speed): the steady response. The virtual board integrates the same equations in time
(:mod:`trueturn.sim.transient`, ``sim://NAME?response=transient``) so a run-up or coast-down
shows the build-up and lag of a resonance passed quickly.

Angles follow :mod:`trueturn.angles`: a mass angle is counted from the reference mark
against rotation, a phase is the lag of the 1x positive peak after the tach event. The
rotor turns in the positive sense of the fixed frame; a pickup direction and the tach
direction are fixed angles around the shaft, 0 = horizontal, counted with rotation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from trueturn.angles import wrap_deg
from trueturn.constants import STANDARD_GRAVITY_M_S2
from trueturn.model.fields import limits

#: No quantity of a simulated machine comes near this; beyond it the model's arithmetic
#: overflows (the limit of every number a scenario file gives).
LARGEST_VALUE = 1e12


@dataclass(frozen=True)
class Mass:
    """A point mass on the rotor: plane name, grams, and angle in the project convention.

    The field limits are checked when a scenario file is read (its ``as_found`` list)."""

    plane: str = field(metadata=limits(nonempty=True))
    mass_g: float = field(metadata=limits(minimum=0, maximum=LARGEST_VALUE))
    angle_deg: float = field(metadata=limits(minimum=-LARGEST_VALUE, maximum=LARGEST_VALUE))


@dataclass(frozen=True)
class Support:
    """One support: axial position and its horizontal/vertical stiffness and damping."""

    axial_mm: float
    stiffness_h_n_per_m: float
    stiffness_v_n_per_m: float
    damping_h_ns_per_m: float
    damping_v_ns_per_m: float


@dataclass(frozen=True)
class CorrectionPlane:
    """A plane where weights can go: name, axial position, radius of the weight positions."""

    name: str
    axial_mm: float
    radius_mm: float


@dataclass(frozen=True)
class PickupMount:
    """An accelerometer on bearing ``bearing`` sensing along ``direction_deg`` (0 = horizontal)."""

    name: str
    bearing: int
    direction_deg: float


def rpm_to_rad_s(speed_rpm: float) -> float:
    """Shaft speed in rad/s."""
    return speed_rpm * 2.0 * math.pi / 60.0


def unbalance_force_n(mass_g: float, radius_mm: float, speed_rpm: float) -> float:
    """Centrifugal force amplitude ``m*r*omega^2`` of a point mass, in newtons."""
    return mass_g * 1e-3 * radius_mm * 1e-3 * rpm_to_rad_s(speed_rpm) ** 2


@dataclass
class RigidRotor:
    """A rigid rotor on two (or more) bearings with correction planes and pickups.

    ``nonlinearity`` (dimensionless, 0 = linear) adds a mild amplitude-dependent gain and
    phase at each pickup: ``a -> a * (1 + nonlinearity * |a|/g * exp(i*30 deg))``, a stand-in
    for a mount that stiffens or loosens with amplitude, so influence coefficients measured
    with different trial weights differ slightly, as they do on real machines.

    ``housing_mass_kg`` and ``housing_transverse_inertia_kg_m2`` (default 0: the rotor alone
    sits on the supports) are what moves with the rotor on its mounts without turning: a
    motor's housing, a fan's frame, the pedestals. The housing is rigid, fixed to the
    bearings, with its centre of mass at the rotor's; it adds to the mass and the rocking
    inertia the supports carry (so a gram of unbalance shakes the machine less) but not to
    the unbalance, the gyroscopic coupling or the ISO 21940-11 tolerance, which are the
    rotor's.
    """

    mass_kg: float
    transverse_inertia_kg_m2: float
    polar_inertia_kg_m2: float
    centre_of_mass_axial_mm: float
    bearings: list[Support]
    planes: list[CorrectionPlane]
    pickups: list[PickupMount]
    nonlinearity: float = 0.0
    tach_direction_deg: float = 0.0
    housing_mass_kg: float = 0.0
    housing_transverse_inertia_kg_m2: float = 0.0
    _plane_index: dict[str, int] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        if self.mass_kg <= 0 or self.transverse_inertia_kg_m2 <= 0:
            raise ValueError("rotor mass and transverse inertia must be positive")
        if self.housing_mass_kg < 0 or self.housing_transverse_inertia_kg_m2 < 0:
            raise ValueError("the housing's mass and inertia must not be negative")
        if len(self.bearings) < 1:
            raise ValueError("a rotor needs at least one bearing")
        if len({p.name for p in self.planes}) != len(self.planes):
            raise ValueError("correction plane names must be unique")
        for p in self.pickups:
            if not 0 <= p.bearing < len(self.bearings):
                raise ValueError(f"pickup {p.name!r} names bearing {p.bearing}, "
                                 f"the rotor has {len(self.bearings)}")
        self._plane_index = {p.name: i for i, p in enumerate(self.planes)}

    # --- the linear model -------------------------------------------------------------------

    @property
    def mounted_mass_kg(self) -> float:
        """What the supports carry and shake: the rotor and its housing, kg."""
        return self.mass_kg + self.housing_mass_kg

    @property
    def mounted_transverse_inertia_kg_m2(self) -> float:
        """The rocking inertia the supports carry: the rotor's and its housing's, kg m^2."""
        return self.transverse_inertia_kg_m2 + self.housing_transverse_inertia_kg_m2

    def _mass_matrix(self) -> np.ndarray:
        """``diag(m, I_t, m, I_t)`` of everything on the supports (DOFs [x, a, y, b])."""
        m, i_t = self.mounted_mass_kg, self.mounted_transverse_inertia_kg_m2
        return np.diag([m, i_t, m, i_t])

    def equations_of_motion(self, omega: float
                            ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """``M``, ``C + G(omega)`` and ``K`` (4 x 4, DOFs [x, a, y, b]) of
        ``M q'' + (C + G) q' + K q = f``, and the pickups' output map (pickups x 4: a
        pickup's displacement is its row times ``q``)."""
        zc = self.centre_of_mass_axial_mm * 1e-3
        mass = self._mass_matrix()
        stiff = np.zeros((4, 4))
        damp = np.zeros((4, 4))
        for b in self.bearings:
            d = b.axial_mm * 1e-3 - zc
            shape = np.array([[1.0, d], [d, d * d]])
            stiff[0:2, 0:2] += b.stiffness_h_n_per_m * shape
            stiff[2:4, 2:4] += b.stiffness_v_n_per_m * shape
            damp[0:2, 0:2] += b.damping_h_ns_per_m * shape
            damp[2:4, 2:4] += b.damping_v_ns_per_m * shape
        # It*a'' + Ip*Omega*b' ; It*b'' - Ip*Omega*a'' (forward whirl is stiffened); Omega = omega
        damp[1, 3] += self.polar_inertia_kg_m2 * omega
        damp[3, 1] -= self.polar_inertia_kg_m2 * omega
        # Output map: pickup displacement = row . [x, a, y, b]
        out = np.zeros((len(self.pickups), 4))
        for i, p in enumerate(self.pickups):
            d = self.bearings[p.bearing].axial_mm * 1e-3 - zc
            c, s = math.cos(math.radians(p.direction_deg)), math.sin(math.radians(p.direction_deg))
            out[i] = [c, c * d, s, s * d]
        return mass, damp, stiff, out

    def _matrices(self, omega: float) -> tuple[np.ndarray, np.ndarray]:
        """Dynamic stiffness ``K + i*omega*(C + G) - omega^2*M`` for DOFs [x, a, y, b]."""
        mass, damp, stiff, out = self.equations_of_motion(omega)
        return stiff + 1j * omega * damp - omega**2 * mass, out

    def _plane_forcing(self, omega: float) -> np.ndarray:
        """Generalised force per plane (4 x planes) for 1 g at the plane radius at angle 0.

        A body point at angle ``alpha`` (against rotation) sits at fixed angle
        ``omega*t + tach_dir - alpha`` when the tach event is at t = 0; its force is
        ``m r omega^2 (cos, sin)`` of that angle, i.e. ``Re(F e^{i omega t})`` with
        ``F_x = m r omega^2 e^{i(tach_dir - alpha)}`` and ``F_y = -i F_x``.
        """
        zc = self.centre_of_mass_axial_mm * 1e-3
        tach = math.radians(self.tach_direction_deg)
        forcing = np.zeros((4, len(self.planes)), dtype=complex)
        for j, plane in enumerate(self.planes):
            fx = 1e-3 * plane.radius_mm * 1e-3 * omega**2 * complex(math.cos(tach), math.sin(tach))
            d = plane.axial_mm * 1e-3 - zc
            forcing[:, j] = [fx, fx * d, -1j * fx, -1j * fx * d]
        return forcing

    def influence_matrix(self, speed_rpm: float) -> np.ndarray:
        """Linear influence coefficients, pickups x planes, complex, in (m/s^2) per gram.

        Entry (i, j) is the 1x acceleration phasor (project convention) at pickup i caused
        by 1 g at the radius of plane j at angle 0. A mass ``m`` at angle ``alpha`` in that
        plane contributes ``m * exp(i*alpha) * H[i, j]`` (with a phasor counted against
        rotation, a heavier spot at a larger angle lags more).
        """
        omega = rpm_to_rad_s(speed_rpm)
        if not self.planes or not self.pickups:
            return np.zeros((len(self.pickups), len(self.planes)), dtype=complex)
        dyn, out = self._matrices(omega)
        disp = out @ np.linalg.solve(dyn, self._plane_forcing(omega))
        accel = -(omega**2) * disp  # e^{i omega t} convention
        # Project phasor of Re(X e^{i omega t}) = A cos(theta - phi) is conj(X).
        return np.conj(accel)

    def unbalance_phasors(self, masses: list[Mass]) -> np.ndarray:
        """Sum of ``mass_g * exp(i*angle)`` per plane (grams at the plane radius)."""
        u = np.zeros(len(self.planes), dtype=complex)
        for m in masses:
            try:
                j = self._plane_index[m.plane]
            except KeyError:
                raise ValueError(f"no correction plane named {m.plane!r}; planes are "
                                 f"{', '.join(self._plane_index)}") from None
            u[j] += m.mass_g * np.exp(1j * math.radians(m.angle_deg))
        return u

    def response_1x(self, speed_rpm: float, masses: list[Mass]) -> dict[str, complex]:
        """Steady-state 1x acceleration phasor at each pickup, m/s^2, project convention.

        Exact for the linear model (``nonlinearity = 0``); with nonlinearity the linear
        response is passed through the amplitude-dependent gain described on the class.
        """
        linear = self.influence_matrix(speed_rpm) @ self.unbalance_phasors(masses)
        if self.nonlinearity:
            gain = 1.0 + self.nonlinearity * np.abs(linear) / STANDARD_GRAVITY_M_S2 \
                * np.exp(1j * math.radians(30.0))
            linear = linear * gain
        return {p.name: complex(v) for p, v in zip(self.pickups, linear, strict=True)}

    # --- helpers for scenarios and tests ----------------------------------------------------

    def plane(self, name: str) -> CorrectionPlane:
        """The correction plane called ``name``."""
        return self.planes[self._plane_index[name]]

    def angle_from_tach_deg(self, pickup: PickupMount) -> float:
        """The pickup's true angle from the tach as a machine profile gives it
        (``Pickup.angle_from_tach_deg``: from the tach to the pickup's sensing direction,
        counted against rotation). This model's fixed angles grow with rotation (see
        :meth:`_plane_forcing`), so it is ``tach - direction``."""
        return wrap_deg(self.tach_direction_deg - pickup.direction_deg)

    def critical_speeds_rpm(self) -> list[float]:
        """Undamped synchronous critical speeds (rpm): where a 1x forcing meets a natural
        frequency of the rotor on its supports, gyroscopic coupling included.

        With the whirl at the shaft speed ``w`` the gyroscopic term ``i w G(w)`` is
        ``-w^2 (-i Gp)`` (``G`` grows with ``w``), so the undamped 1x response is unbounded
        where ``det(K - w^2 (M - i Gp)) = 0``: the generalised eigenvalues ``w^2`` of
        ``(K, M - i Gp)``, a Hermitian pencil with real eigenvalues. A tilt mode whose polar
        inertia exceeds its transverse inertia (a disc) has no forward critical speed (no
        positive eigenvalue). From memory: Vance, *Rotordynamics of Turbomachinery*,
        synchronous critical speeds of a rigid rotor on flexible supports.
        """
        dyn0, _ = self._matrices(0.0)
        mass = self._mass_matrix().astype(complex)
        mass[1, 3] -= 1j * self.polar_inertia_kg_m2
        mass[3, 1] += 1j * self.polar_inertia_kg_m2
        eig = scipy.linalg.eigvals(dyn0.real, mass)
        out = [float(math.sqrt(e.real)) * 60.0 / (2 * math.pi) for e in eig
               if np.isfinite(e) and e.real > 0 and abs(e.imag) <= 1e-9 * abs(e.real)]
        return sorted(out)

    def direction_criticals_rpm(self, pickup: PickupMount) -> list[float]:
        """The synchronous critical speeds (rpm, slowest first) of the rigid-body modes in
        ``pickup``'s direction alone: translation and tilt on that direction's bearing
        stiffnesses (horizontal or vertical, whichever the pickup is nearer), the tilt
        meeting ``I_t - I_p`` (gyroscopic stiffening of the 1x whirl; a disc's tilt has
        none). What a coast-down seen by that pickup passes through, without the coupling
        of anisotropic supports that :meth:`critical_speeds_rpm` keeps. From memory: Vance,
        *Rotordynamics of Turbomachinery*, synchronous critical speeds of a rigid rotor."""
        zc = self.centre_of_mass_axial_mm * 1e-3
        vertical = abs(math.sin(math.radians(pickup.direction_deg))) > 0.5
        stiff = np.zeros((2, 2))
        for b in self.bearings:
            d = b.axial_mm * 1e-3 - zc
            k = b.stiffness_v_n_per_m if vertical else b.stiffness_h_n_per_m
            stiff += k * np.array([[1.0, d], [d, d * d]])
        inertia = np.diag([self.mounted_mass_kg,
                           self.mounted_transverse_inertia_kg_m2 - self.polar_inertia_kg_m2])
        return sorted(math.sqrt(e.real) * 30.0 / math.pi
                      for e in scipy.linalg.eigvals(stiff, inertia)
                      if np.isfinite(e) and e.real > 0)

    def natural_frequencies_hz(self, speed_rpm: float = 0.0) -> list[float]:
        """Undamped natural frequencies (Hz) of the rigid-body modes, gyroscopics ignored."""
        dyn0, _ = self._matrices(0.0)
        mass = self._mass_matrix()
        eig = np.linalg.eigvals(np.linalg.solve(mass, dyn0.real))
        return sorted(float(math.sqrt(max(e.real, 0.0)) / (2 * math.pi)) for e in eig)

    def modes_at_rest(self, struck: str | None = None) -> list[RestMode]:
        """The damped modes of the rotor on its supports at standstill, slowest first.

        The eigenvalues ``lambda`` of the state matrix ``[[0, I], [-M^-1 K, -M^-1 C]]``
        (:meth:`equations_of_motion` at zero speed: no gyroscopic coupling) in complex
        conjugate pairs: natural frequency ``|lambda| / 2 pi``, damping ratio
        ``-Re(lambda) / |lambda|`` (Rao, *Mechanical Vibrations*, free vibration with
        viscous damping; Ewins, *Modal Testing*, non-proportional damping: complex modes;
        from memory). With ``struck`` (a pickup's name) each mode also gives the
        acceleration amplitude (m/s^2, the envelope at t = 0+) it starts with at every pickup
        after an impulse of 1 N s at that pickup along its sensing direction (a mallet's tap
        on the housing where the pickup sits): the free response is
        ``accel(t) = Re(sum_k 2 c_k e^{lambda_k t})`` over the pairs, ``c_k`` the modal
        residue ``out M^-1 [-K, -C] v_k (V^-1 z0)_k`` with ``z0 = [0; M^-1 out_struck']``.
        """
        mass, damp, stiff, out = self.equations_of_motion(0.0)
        n = mass.shape[0]
        inv_mass = np.linalg.inv(mass)
        state = np.block([[np.zeros((n, n)), np.eye(n)],
                          [-inv_mass @ stiff, -inv_mass @ damp]])
        lam, vec = scipy.linalg.eig(state)
        residues = None
        if struck is not None:
            names = [p.name for p in self.pickups]
            if struck not in names:
                raise ValueError(f"no pickup called {struck!r}; pickups are {', '.join(names)}")
            start = np.concatenate([np.zeros(n), inv_mass @ out[names.index(struck)]])
            modal = np.linalg.solve(vec, start.astype(complex))
            to_accel = out @ inv_mass @ np.hstack([-stiff, -damp])
            residues = (to_accel @ vec) * modal[None, :]  # pickups x modes
        modes = []
        for k, value in enumerate(lam):
            if value.imag <= 0 or not np.isfinite(value):
                continue  # one of each pair; overdamped (real) motion is no mode
            size = abs(value)
            seen = {} if residues is None else {
                p.name: float(2.0 * abs(residues[i, k])) for i, p in enumerate(self.pickups)}
            modes.append(RestMode(natural_frequency_hz=float(size / (2.0 * math.pi)),
                                  damping_ratio=float(-value.real / size),
                                  accel_per_impulse=seen))
        return sorted(modes, key=lambda m: m.natural_frequency_hz)


@dataclass(frozen=True)
class RestMode:
    """A damped mode at standstill (:meth:`RigidRotor.modes_at_rest`): natural frequency
    (Hz), damping ratio, and per pickup the acceleration amplitude (m/s^2) a 1 N s impulse
    at the struck pickup starts it with (empty when no pickup was struck)."""

    natural_frequency_hz: float
    damping_ratio: float
    accel_per_impulse: dict[str, float] = field(default_factory=dict)

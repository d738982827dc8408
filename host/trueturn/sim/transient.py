"""The rigid rotor's motion in time, while its speed changes (run-up, coast-down, wander).

:meth:`RigidRotor.response_1x <trueturn.sim.rotor.RigidRotor.response_1x>` is the steady 1x
at one speed. A machine passing a lightly damped support resonance quickly never reaches
that steady state: the response builds up late, its peak comes later and lower than the
steady curve's and its phase lags (F. M. Lewis, "Vibration during acceleration through a
critical speed", Trans. ASME 54, 1932; from memory). This module integrates the same
model's equations of motion through time::

    M q'' + (C + G(Omega)) q' + K q = Re( F1 (Omega^2 - i Omega') e^{i theta(t)} )

(:meth:`RigidRotor.equations_of_motion`; ``F1`` the generalised force of the unbalance per
(rad/s)^2, as :meth:`RigidRotor._plane_forcing` builds it; ``theta`` the shaft angle from
the tach mark). A point mass ``m`` at radius ``r`` on a shaft turning at angle ``phi(t)``
pushes the shaft with ``m r (phi'^2 - i phi'') e^{i phi}`` (minus its mass times its
acceleration ``r (i phi'' - phi'^2) e^{i phi}``): the centrifugal force and, 90 degrees
ahead of it, the angular-acceleration term. That term is kept though it is small (the
bench grinder passing its rubber-feet mode at 284 rpm/s: ``Omega' / Omega^2`` = 0.4 %).

Method. The state is complex, ``z = [q; q']`` with ``Re(z)`` the motion: the response to
the complex forcing ``F e^{i theta}``, whose real part answers the real forcing because the
matrices are real. Over one step of the board the gyroscopic matrix is frozen at the step's
mean speed; the state matrix ``A = [[0, I], [-M^-1 K, -M^-1 (C+G)]]`` is diagonalised
(``A = V diag(lambda) V^-1``) and every modal coordinate ``eta = V^-1 z`` advances exactly
over each interval ``h`` in which the shaft turns at the constant mean speed ``W`` of the
interval (exponential integrator; the convolution integral in closed form)::

    eta(t + h) = e^{lambda h} eta(t) + b g e^{i theta(t)} (e^{i W h} - e^{lambda h}) / (i W - lambda)

with ``b = V^-1 [0; M^-1 F1]`` and ``g = W^2 - i Omega'``. At a constant speed the steady
state ``z = [Z; i Omega Z] e^{i theta}``, ``Z = (K + i Omega (C+G) - Omega^2 M)^-1 F1
Omega^2``, is a fixed point of this step to rounding, so a steady run reads what
``response_1x`` gives; while the speed changes the only approximations are the speed taken
constant within an interval (at most ~1 ms: a phase error ``Omega' h^2 / 8``, 4e-6 rad at
the grinder's rate) and the gyroscopic matrix frozen within a step (50 ms at most).

The pickups read the acceleration ``out q'' = out M^-1 (f - K q - (C+G) q')``.
"""

from __future__ import annotations

import math

import numpy as np

from trueturn.constants import STANDARD_GRAVITY_M_S2
from trueturn.sim.rotor import RigidRotor

#: a mode that decays by more than e^-DECAY_LIMIT within one interval is taken as following
#: its forcing at once (its memory term is below 1e-13 of its response), and a run of
#: intervals is cut into pieces over which the slowest remaining mode decays by at most that
#: much (the cumulative sums below stay far from overflow: e^30 = 1e13)
DECAY_LIMIT = 30.0
#: below this ``|(i W - lambda) h|`` an interval's gain is taken through ``expm1`` (the
#: direct difference of exponentials would lose ``1e-16 / |x|`` of its precision)
SMALL_EXPONENT = 1e-3
#: the eigenvector basis is refused (ValueError) beyond this condition number: a defective
#: state matrix (two modes merged exactly) has no modal form
MAX_MODAL_CONDITION = 1e10


def _phi1(x: np.ndarray) -> np.ndarray:
    """``(e^x - 1) / x``, 1 at ``x = 0``, accurate for small ``|x|``."""
    safe = np.where(x == 0, 1.0, x)
    return np.where(x == 0, 1.0, np.expm1(safe) / safe)


class RotorMotion:
    """The time response of a :class:`RigidRotor` to its rotating unbalance.

    Hold the complex state at the present instant; :meth:`advance` moves it along a shaft
    angle history and gives the pickups' complex accelerations (their real parts are the
    accelerations, m/s^2; the project's 1x phasor at steady running is the conjugate of
    ``accel * e^{-i theta}``).

    Parameters
    ----------
    rotor : RigidRotor
        The model; its matrices, output map and plane forcing are used as they are.
    """

    def __init__(self, rotor: RigidRotor) -> None:
        self.rotor = rotor
        self.state = np.zeros(8, dtype=complex)
        self._unbalance = np.zeros(len(rotor.planes), dtype=complex)
        self._force_per_rad2 = np.zeros(4, dtype=complex)  # F1
        self._modes_at: float | None = None
        # the speed-independent parts of the state matrix and the output, once
        mass, damp, stiff, out = rotor.equations_of_motion(0.0)
        inv_mass = np.linalg.inv(mass)
        gyro = rotor.equations_of_motion(1.0)[1] - damp  # G per rad/s
        self._a_still = np.block([[np.zeros((4, 4)), np.eye(4)],
                                  [-inv_mass @ stiff, -inv_mass @ damp]])
        self._a_per_rad_s = np.block([[np.zeros((4, 8))],
                                      [np.zeros((4, 4)), -inv_mass @ gyro]])
        self._to_state = np.vstack([np.zeros((4, 4)), inv_mass])
        self._to_accel = out @ inv_mass  # pickups x 4: acceleration per generalised force
        self._cy_still = self._to_accel @ np.hstack([-stiff, -damp])
        self._cy_per_rad_s = self._to_accel @ np.hstack([np.zeros((4, 4)), -gyro])
        self._modes: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray,
                           np.ndarray] | None = None

    # --- unbalance and steady state -----------------------------------------------------------

    def _force_of(self, unbalance: np.ndarray) -> np.ndarray:
        """``F1``: generalised force per (rad/s)^2 of plane phasors ``unbalance`` (grams)."""
        if not len(unbalance):
            return np.zeros(4, dtype=complex)
        # _plane_forcing grows with omega^2 exactly: at omega = 1 it is the force per (rad/s)^2;
        # the conjugate turns the project's mass angles into the fixed frame's phase
        return self.rotor._plane_forcing(1.0) @ np.conj(unbalance)

    def steady_state(self, unbalance: np.ndarray, theta_rad: float, omega_rad_s: float
                     ) -> np.ndarray:
        """The steady complex state ``[Z; i Omega Z] e^{i theta}`` at constant speed."""
        if omega_rad_s <= 0:
            return np.zeros(8, dtype=complex)
        mass, damp, stiff, _ = self.rotor.equations_of_motion(omega_rad_s)
        dyn = stiff + 1j * omega_rad_s * damp - omega_rad_s ** 2 * mass
        amp = np.linalg.solve(dyn, self._force_of(unbalance) * omega_rad_s ** 2)
        turn = complex(math.cos(theta_rad), math.sin(theta_rad))
        return np.concatenate([amp, 1j * omega_rad_s * amp]) * turn

    def settle(self, unbalance: np.ndarray, theta_rad: float, omega_rad_s: float) -> None:
        """Put the rotor in its steady state (power-up at speed)."""
        self._unbalance = np.array(unbalance, dtype=complex)
        self._force_per_rad2 = self._force_of(self._unbalance)
        self.state = self.steady_state(self._unbalance, theta_rad, omega_rad_s)

    def set_unbalance(self, unbalance: np.ndarray, theta_rad: float, omega_rad_s: float
                      ) -> None:
        """Change the masses on the rotor (a weight added, a loose part settled).

        The model is linear: the state gains the steady response of the change at the
        present speed, as if that mass had always been there. At constant speed this is the
        new steady state exactly (a virtual rig may add weights at speed, which no person
        does; at standstill it adds nothing)."""
        unbalance = np.array(unbalance, dtype=complex)
        if np.array_equal(unbalance, self._unbalance):
            return
        self.state = self.state + self.steady_state(unbalance - self._unbalance, theta_rad,
                                                    omega_rad_s)
        self._unbalance = unbalance
        self._force_per_rad2 = self._force_of(unbalance)

    @property
    def at_rest(self) -> bool:
        """True when the rotor does not move at all (nothing left to integrate)."""
        return not self.state.any()

    def strike(self, impulse: np.ndarray) -> None:
        """A mallet's tap at standstill: an impulse (N s, generalised on the model's
        degrees of freedom, e.g. a pickup's row of the output map times the impulse) added
        to the velocities, ``q' += M^-1 P``.

        The state stays the analytic form of the motion: the tap's modal coordinates
        ``V^-1 [0; M^-1 P]`` are kept, doubled, on the modes of positive frequency only (a
        real, overdamped mode as it is), so ``Re(state)`` is the real free response and
        ``|out accel|`` its envelope, which the model's amplitude-dependent gain
        (:func:`nonlinear_accel`) reads as it reads a steady 1x amplitude.

        Parameters
        ----------
        impulse : numpy.ndarray
            The generalised impulse, N s (N m s on a tilt).
        """
        lam, vec, vec_inv, to_state, _, _ = self._modal_form(0.0)
        modal = vec_inv @ (to_state @ np.asarray(impulse, dtype=complex))
        weight = np.where(lam.imag > 0, 2.0, np.where(lam.imag < 0, 0.0, 1.0))
        self.state = self.state + vec @ (weight * modal)

    # --- the modal form at one speed ----------------------------------------------------------

    def _modal_form(self, omega_rad_s: float) -> tuple[np.ndarray, np.ndarray, np.ndarray,
                                                      np.ndarray, np.ndarray, np.ndarray]:
        """Eigenvalues, eigenvectors, their inverse, and the output matrices at one speed:
        ``(lam, V, V^-1, [0; M^-1], Cy, M^-1 out-wise)`` with ``accel = Cy z + Dy f``."""
        if self._modes is not None and self._modes_at == omega_rad_s:
            return self._modes
        a = self._a_still + omega_rad_s * self._a_per_rad_s
        lam, vec = np.linalg.eig(a)
        vec_inv = np.linalg.inv(vec)
        # the 1-norm condition number, from the inverse at hand (numpy.linalg.cond's value)
        if np.abs(vec).sum(axis=0).max() * np.abs(vec_inv).sum(axis=0).max() \
                > MAX_MODAL_CONDITION:
            raise ValueError("the rotor's state matrix has no modal form at "
                             f"{omega_rad_s * 30 / math.pi:.1f} rpm (two modes merge)")
        cy = self._cy_still + omega_rad_s * self._cy_per_rad_s
        self._modes = (lam, vec, vec_inv, self._to_state, cy, self._to_accel)
        self._modes_at = omega_rad_s
        return self._modes

    # --- integration --------------------------------------------------------------------------

    def advance(self, time_s: np.ndarray, theta_rad: np.ndarray, omega_rad_s: np.ndarray,
                accel_rad_s2: float, gyro_omega_rad_s: float) -> np.ndarray:
        """Move the state along a shaft history; the pickups' complex accelerations on it.

        Parameters
        ----------
        time_s : numpy.ndarray
            Increasing instants, seconds, the first being the present one (the state's).
        theta_rad, omega_rad_s : numpy.ndarray
            The shaft angle (rad, from the tach mark, continuous) and speed at those instants.
        accel_rad_s2 : float
            The angular acceleration over the history (the forcing's tangential term).
        gyro_omega_rad_s : float
            The speed at which the gyroscopic matrix is taken for the whole history.

        Returns
        -------
        numpy.ndarray
            Complex, pickups x instants: the real part is each pickup's acceleration, m/s^2.
            The state ends at the last instant.
        """
        lam, vec, vec_inv, to_state, cy, to_accel = self._modal_form(gyro_omega_rad_s)
        n = len(time_s)
        states = np.empty((8, n), dtype=complex)
        states[:, 0] = self.state
        if n > 1:
            dt = np.diff(time_s)
            dtheta = np.diff(theta_rad)
            mean_w = np.where(dt > 0, dtheta / np.where(dt > 0, dt, 1.0), omega_rad_s[1:])
            drive = (mean_w ** 2 - 1j * accel_rad_s2) * np.exp(1j * theta_rad[:-1])
            b = vec_inv @ (to_state @ self._force_per_rad2)  # modal force per (rad/s)^2
            if dt.min() == dt.max():  # a uniform grid (the conversions): one e^{lambda h}
                decay = np.repeat(np.exp(lam * dt[0])[:, None], len(dt), axis=1)
            else:
                decay = np.exp(np.outer(lam, dt))  # e^{lambda h}, modes x intervals
            gap = 1j * mean_w[None, :] - lam[:, None]
            gain = (np.exp(1j * mean_w * dt)[None, :] - decay) / np.where(gap == 0, 1.0, gap)
            # the difference cancels where (i W - lambda) h is tiny (relative error 1e-16/|x|)
            x = gap * dt[None, :]
            small = np.abs(x) < SMALL_EXPONENT
            if small.any():
                gain[small] = (decay * dt[None, :])[small] * _phi1(x[small])
            beta = b[:, None] * gain * drive[None, :]
            # a mode too fast for the intervals follows its forcing: its particular solution
            fast = -lam.real * float(dt.max()) > DECAY_LIMIT
            ends = (omega_rad_s[1:] ** 2 - 1j * accel_rad_s2) * np.exp(1j * theta_rad[1:])
            follow = b[fast, None] * ends[None, :] / (1j * omega_rad_s[1:][None, :]
                                                      - lam[fast, None])
            eta = self._modal_recurrence(vec_inv @ self.state, lam, dt, beta, fast, follow)
            states[:, 1:] = vec @ eta
            self.state = states[:, -1].copy()
        force = np.outer(self._force_per_rad2,
                         (omega_rad_s ** 2 - 1j * accel_rad_s2) * np.exp(1j * theta_rad))
        return cy @ states + to_accel @ force

    def one_x(self, theta_rad: float, omega_rad_s: float, accel_rad_s2: float = 0.0
              ) -> np.ndarray:
        """The pickups' 1x at this instant: the complex acceleration turned back by the shaft
        angle, ``accel * e^{-i theta}`` (its conjugate is the project's phasor; steady
        running: ``RigidRotor.influence_matrix @ u`` conjugated). While the speed changes
        it is the response of the moment, free vibration included."""
        _, _, _, _, cy, to_accel = self._modal_form(omega_rad_s)
        force = self._force_per_rad2 * (omega_rad_s ** 2 - 1j * accel_rad_s2)
        turn = complex(math.cos(theta_rad), -math.sin(theta_rad))
        return (cy @ self.state) * turn + to_accel @ force

    @staticmethod
    def _modal_recurrence(eta0: np.ndarray, lam: np.ndarray, dt: np.ndarray,
                          beta: np.ndarray, fast: np.ndarray, follow: np.ndarray
                          ) -> np.ndarray:
        """``eta_n = e^{lambda h_n} eta_{n-1} + beta_n`` for every mode, vectorised:
        ``eta_n = E_n (eta_0 + sum_{j<=n} beta_j / E_j)`` with ``E_n = e^{lambda t_n}``,
        in pieces short enough that ``E`` stays far from overflow. A mode that forgets its
        past within the longest interval (by e^-DECAY_LIMIT; ``fast``) takes ``follow``, its
        particular solution at each instant."""
        n = len(dt)
        eta = np.empty((len(lam), n), dtype=complex)
        rate = -lam.real
        eta[fast] = follow
        slow = ~fast
        if not slow.any():
            return eta
        lam_s, beta_s = lam[slow], beta[slow]
        span = DECAY_LIMIT / max(float(rate[slow].max()), 1e-300)
        times = np.cumsum(dt)
        start, state = 0, eta0[slow]
        while start < n:
            base = times[start - 1] if start else 0.0
            end = max(int(np.searchsorted(times, base + span, side="right")), start + 1)
            grow = np.exp(np.outer(lam_s, times[start:end] - base))
            piece = grow * (state[:, None] + np.cumsum(beta_s[:, start:end] / grow, axis=1))
            eta[slow, start:end] = piece
            state = piece[:, -1]
            start = end
        return eta


def nonlinear_accel(accel: np.ndarray, nonlinearity: float) -> np.ndarray:
    """The model's amplitude-dependent gain (:class:`RigidRotor`) on complex accelerations.

    ``RigidRotor.response_1x`` multiplies a project phasor ``p`` by
    ``1 + nonlinearity |p| / g e^{i 30 deg}``; the complex signal ``X e^{i theta}`` carries
    ``conj(p)``, so it is multiplied by the conjugate gain, on its own modulus (the 1x
    amplitude when steady)."""
    if not nonlinearity:
        return accel
    return accel * (1.0 + nonlinearity * np.abs(accel) / STANDARD_GRAVITY_M_S2
                    * np.exp(-1j * math.radians(30.0)))

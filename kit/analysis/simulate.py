r"""Nonlinear 6-DoF simulation of a rotor failure under hover and relaxed-hover LQR.

State: position ``r`` and velocity ``v`` of the centre of mass in the world frame (z up), the
unit quaternion ``q = (q_w, q_x, q_y, q_z)`` turning body into world axes (scalar first) and the
body angular velocity ``omega``; with motor lag, the rotor thrusts too. The equations are

.. math::

    \dot{\mathbf r} = \mathbf v, \qquad
    \dot{\mathbf v} = \frac{1}{m} \mathbf R(q) \sum_i f_i \mathbf e_z - g \mathbf e_z, \qquad
    \dot q = \tfrac12\, q \otimes (0, \boldsymbol\omega),

    \mathbf J \dot{\boldsymbol\omega} + \boldsymbol\omega \times \Big(\mathbf J\boldsymbol\omega
    + \sum_i s_i I_{P,i} \sqrt{f_i / k_{f,i}}\,\mathbf e_z + h\,\mathbf e_z\Big)
    = \sum_i \mathbf r_i \times f_i \mathbf e_z - \sum_i s_i \kappa_i f_i \mathbf e_z
      + \boldsymbol\tau_d ,
    \qquad \tau_m \dot f_i = f_{i,\mathrm{cmd}} - f_i \ \text{(optional lag)},

evaluated with the generated functions ``model.translation_accel`` and ``model.omega_dot``;
thrusts bounded to ``[min_thrust_n, max_thrust_n]`` per rotor, failed rotors give none from the
failure on. The flown controller (:func:`simulate_failure`, DESIGN.md "Control architecture in
the nonlinear simulation"): height and horizontal-position loops (:class:`OuterLoop`) command
the thrust direction ``d`` and the collective; the attitude LQR acts on
``x = (p - p_bar, q - q_bar, n_dx - n_bar_x, n_dy - n_bar_y[, f - f_bar])`` with
``n_d = R^T d``; after the failure and the detection delay a recovery law gain-scheduled on the
measured spin rate takes over (:func:`recovery_schedule`). A run converges only when tilt, body
rates, yaw rate, position, height and velocity all settle (module tolerances
``TILT_TOL`` .. ``SPEED_TOL_M_S``); its horizon is ``HORIZON_TIME_CONSTANTS`` times the longest of
the slowest closed-loop pole and the spin-up time constant ``J_zz / gamma_z``; a run whose
vehicle sinks ``[review] crash_height_loss_m`` below its start has crashed and stops there
(:func:`crash_event`). :func:`simulate_about` (no outer loop, one LQR) is the
linear-against-nonlinear comparison.

References
----------
J. Diebel, "Representing attitude: Euler angles, unit quaternions, and rotation vectors",
Stanford 2006, eq. 125 (quaternion to rotation matrix) and sec. 6 (kinematics; from memory).
M. W. Mueller and R. D'Andrea, "Stability and control of a quadrocopter despite the complete
loss of one, two, or three propellers", IEEE ICRA 2014, sec. IV-V (from memory).
Hairer, Norsett & Wanner, Solving Ordinary Differential Equations I, 2nd ed., sec. II.5
(Dormand-Prince pairs; from memory).
W. J. Rugh, J. S. Shamma, "Research on gain scheduling", Automatica 36(10), 2000, sec. 2-3
(linearisation-based gain scheduling; from memory).
"""

from __future__ import annotations

import dataclasses
import html
import math
import warnings
from dataclasses import dataclass, replace

import numpy as np
from scipy.integrate import solve_ivp

from kit.analysis import control as C
from kit.analysis import equilibrium as E
from kit.analysis.vehicle import Vehicle
from kit.errors import EquilibriumNotFound

#: Default relative tolerance of the integrator.
RTOL = 1e-6
#: Default largest integration step, s.
MAX_STEP_S = 0.01
#: Default output sample interval, s.
SAMPLE_S = 0.002
#: Convergence tolerances over the last second: body rates (rad/s) and n components (1).
RATE_TOL_RAD_S = 0.05
N_TOL = 0.005
#: Window at the end of a run over which convergence is judged, s.
CONVERGENCE_WINDOW_S = 1.0


# --- quaternion helpers (scalar first, body -> world) ---


def quat_mul(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Hamilton product ``a (x) b`` of scalar-first quaternions."""
    aw, ax, ay, az = a
    bw, bx, by, bz = b
    return np.array([aw * bw - ax * bx - ay * by - az * bz,
                     aw * bx + ax * bw + ay * bz - az * by,
                     aw * by - ax * bz + ay * bw + az * bx,
                     aw * bz + ax * by - ay * bx + az * bw])


def rotation_matrix(q: np.ndarray) -> np.ndarray:
    """Body-to-world rotation matrix of a quaternion (normalised first); Diebel eq. 125."""
    w, x, y, z = np.asarray(q, float) / np.linalg.norm(q)
    return np.array([
        [1 - 2 * (y * y + z * z), 2 * (x * y - w * z), 2 * (x * z + w * y)],
        [2 * (x * y + w * z), 1 - 2 * (x * x + z * z), 2 * (y * z - w * x)],
        [2 * (x * z - w * y), 2 * (y * z + w * x), 1 - 2 * (x * x + y * y)],
    ])


def up_in_body(q: np.ndarray) -> np.ndarray:
    """``n = R^T e_z``: world up in body axes, for quaternions of shape (..., 4)."""
    q = np.asarray(q, float)
    q = q / np.linalg.norm(q, axis=-1, keepdims=True)
    w, x, y, z = q[..., 0], q[..., 1], q[..., 2], q[..., 3]
    return np.stack([2 * (x * z - w * y), 2 * (y * z + w * x), 1 - 2 * (x * x + y * y)], axis=-1)


def quat_from_up(n: np.ndarray) -> np.ndarray:
    """The quaternion without heading that turns body vector ``n`` onto world up."""
    n = np.asarray(n, float) / np.linalg.norm(n)
    axis = np.cross(n, [0.0, 0.0, 1.0])
    s = np.linalg.norm(axis)
    if s < 1e-15:
        return np.array([1.0, 0.0, 0.0, 0.0]) if n[2] > 0 else np.array([0.0, 1.0, 0.0, 0.0])
    ang = math.atan2(s, n[2])
    return np.r_[math.cos(ang / 2), math.sin(ang / 2) * axis / s]


# --- controllers and phases ---


@dataclass(frozen=True)
class _Law:
    """``f_cmd = f_bar - K_full x`` about one equilibrium."""

    f_bar: np.ndarray  # (N,)
    K_full: np.ndarray  # (N, 4)
    omega_bar: np.ndarray  # (3,)
    n_bar: np.ndarray  # (3,)

    @classmethod
    def of(cls, eq: E.Equilibrium, ctl: C.LinearControl) -> _Law:
        K = np.zeros((eq.thrust_n.size, 4))
        K[eq.working] = ctl.K
        return cls(np.nan_to_num(eq.thrust_n), K, np.asarray(eq.omega_bar_rad_s, float),
                   np.asarray(eq.n_bar, float))

    def deviation(self, omega: np.ndarray, n: np.ndarray) -> np.ndarray:
        return np.array([omega[..., 0] - self.omega_bar[0], omega[..., 1] - self.omega_bar[1],
                         n[..., 0] - self.n_bar[0], n[..., 1] - self.n_bar[1]]).T


@dataclass(frozen=True)
class _Phase:
    t0: float
    t1: float
    law: _Law
    alive: np.ndarray  # (N,) bool, rotors giving thrust


def _controller(eq: E.Equilibrium, veh: Vehicle, what: str) -> C.LinearControl:
    """The four-state LQR of ``eq`` (no motor lag states, whatever the design's lag)."""
    if not eq.found:
        raise EquilibriumNotFound(f"{what}: {eq.reason}")
    ctl = C.design_control(veh, eq, tau_s=np.zeros(int(np.sum(eq.working))))
    if ctl.K is None:
        raise EquilibriumNotFound(f"{what}: no stabilising LQR ({ctl.note})")
    return ctl


def _html_table(caption: str, rows: list[tuple[str, object]]) -> str:
    def cell(v: object) -> str:
        return html.escape(f"{v:.4g}" if isinstance(v, float) else str(v))

    body = "".join(f"<tr><th>{html.escape(k)}</th><td>{cell(v)}</td></tr>" for k, v in rows)
    return f"<table><caption>{html.escape(caption)}</caption><tbody>{body}</tbody></table>"


def transient_rows(tr: dict) -> list[tuple[str, object]]:
    """Rows of a transient summary for a two-column table (values rounded for reading)."""
    settle = tr["time_to_settle_s"]
    return [
        ("peak tilt (deg)", tr["peak_tilt_deg"]),
        ("least n_z", f"{tr['least_n_z']:.3g}" + (" (inverted)" if tr["inverted"] else "")),
        ("height lost (m)", tr["height_lost_m"]),
        ("largest horizontal excursion (m)", tr["largest_horizontal_excursion_m"]),
        ("time to settle (s)", "not settled" if settle is None or not math.isfinite(settle)
         else settle),
        ("time a working rotor is saturated (s)", tr["time_saturated_s"]),
        ("peak body rates p, q, r (rad/s)",
         rates_text(tr["peak_body_rate_rad_s"])),
        ("not settled", ", ".join(tr["not_settled"]) or "-"),
        ("crashed", f"yes, at t = {tr['crash_time_s']:.3g} s" if tr.get("crashed") else "no"),
    ]


@dataclass(frozen=True)
class SimulationResult:
    """Time series and summary of one nonlinear closed-loop simulation.

    Attributes
    ----------
    names : tuple of str
        Rotor names, in file order (columns of ``thrust_n``).
    failed : tuple of str
        Rotors that fail at ``t_fail_s``.
    t_fail_s, t_switch_s : float
        Failure time and controller switch time, in s (``nan`` when nothing fails or switches).
    motor_lag_s : float or None
        Motor time constant, in s (None: thrust follows the command at once).
    t : ndarray (T,)
        Sample times, in s.
    position_m, velocity_m_s : ndarray (T, 3)
        Centre of mass in the world frame (z up), in m and m/s.
    quaternion : ndarray (T, 4)
        Body-to-world attitude, scalar first.
    omega_rad_s : ndarray (T, 3)
        Body angular velocity, in rad/s.
    n : ndarray (T, 3)
        World up in body axes.
    thrust_n : ndarray (T, N)
        Thrust each rotor gives, in N.
    max_thrust_n : ndarray (N,)
        Thrust limits, in N.
    target_omega_rad_s, target_n_bar : ndarray (3,)
        The equilibrium of the last controller.
    target_spin_rate_rad_s : float
        Its spin rate ``eq.spin_rate_rad_s``, in rad/s.
    deviation : ndarray (T, 4)
        ``x = (p - p_bar, q - q_bar, n_x - n_bar_x, n_y - n_bar_y)`` about that equilibrium.
    converged : bool
        Tilt, body rates, yaw rate, position, height and velocity all within ``tolerances`` over
        the last :data:`CONVERGENCE_WINDOW_S`.
    solver_ok : bool
        The integrator reached ``t_end``.
    message : str
    tolerances : dict or None
        Convergence tolerances used (and ``not_settled`` for runs without outer loops).
    transient : dict or None
        Transient summary after the failure: peak tilt, least n_z and ``inverted``, height
        lost, largest horizontal excursion, time to settle (nan: never), time a working rotor is
        saturated, peak rates, quantities not settled.
    outer_loop : bool
        Whether the height and position loops flew.
    command_n : ndarray (T, N) or None
        Clipped thrust commands, in N.
    spin_about_command_rad_s : ndarray (T,) or None
        Measured spin rate about the commanded thrust direction, in rad/s.
    crashed : bool
        The run stopped at the crash event (:func:`crash_event`): the vehicle sank
        ``crash_height_loss_m`` below its start; ``message`` says when. Never converged.
    crash_time_s : float
        Time of the crash event, in s (nan: no crash).
    crash_height_loss_m : float
        Crash floor of the run, in m below the start (inf: none).
    """

    names: tuple[str, ...]
    failed: tuple[str, ...]
    t_fail_s: float
    t_switch_s: float
    motor_lag_s: float | None
    t: np.ndarray
    position_m: np.ndarray
    velocity_m_s: np.ndarray
    quaternion: np.ndarray
    omega_rad_s: np.ndarray
    n: np.ndarray
    thrust_n: np.ndarray
    max_thrust_n: np.ndarray
    target_omega_rad_s: np.ndarray
    target_n_bar: np.ndarray
    target_spin_rate_rad_s: float
    deviation: np.ndarray
    converged: bool
    rate_tol_rad_s: float
    n_tol: float
    solver_ok: bool
    message: str
    n_rhs_evaluations: int
    tolerances: dict | None = None
    transient: dict | None = None
    outer_loop: bool = False
    command_n: np.ndarray | None = None
    spin_about_command_rad_s: np.ndarray | None = None
    crashed: bool = False
    crash_time_s: float = math.nan
    crash_height_loss_m: float = math.inf

    @property
    def altitude_m(self) -> np.ndarray:
        """Height of the centre of mass above its start, in m."""
        return self.position_m[:, 2] - self.position_m[0, 2]

    @property
    def spin_rate_rad_s(self) -> np.ndarray:
        """Spin rate about world up, ``omega . n``, in rad/s."""
        return np.einsum("ij,ij->i", self.omega_rad_s, self.n)

    @property
    def final_spin_rate_rad_s(self) -> float:
        return float(self.spin_rate_rad_s[-1])

    @property
    def spin_rate_error(self) -> float:
        """Relative error of the final spin rate against the equilibrium's (nan if it is 0)."""
        w = self.target_spin_rate_rad_s
        return abs(self.final_spin_rate_rad_s - w) / abs(w) if abs(w) > 1e-9 else math.nan

    @property
    def peak_thrust_n(self) -> np.ndarray:
        return np.max(self.thrust_n, axis=0)

    @property
    def peak_body_rate_rad_s(self) -> np.ndarray:
        """Largest ``|p|, |q|, |r|`` over the run, in rad/s."""
        return np.max(np.abs(self.omega_rad_s), axis=0)

    def series(self, max_points: int = 500) -> dict:
        """Decimated time series for plots (every k-th sample, the last one kept), plain JSON."""
        k = max(1, math.ceil(self.t.size / max(1, max_points)))
        idx = np.r_[np.arange(0, self.t.size, k)]
        if idx[-1] != self.t.size - 1:
            idx = np.r_[idx, self.t.size - 1]

        def col(a):
            return [[float(v) for v in row] for row in a[idx]]

        return {
            "t_s": [float(v) for v in self.t[idx]],
            "omega_rad_s": col(self.omega_rad_s),
            "n": col(self.n),
            "thrust_n": {name: [float(v) for v in self.thrust_n[idx, i]]
                         for i, name in enumerate(self.names)},
            "position_m": col(self.position_m),
            "altitude_m": [float(v) for v in self.altitude_m[idx]],
            "spin_rate_rad_s": [float(v) for v in self.spin_rate_rad_s[idx]],
        }

    def to_dict(self) -> dict:
        """Summary (no full series; see :meth:`series`), plain JSON, SI."""

        def num(v):
            v = float(v)
            return v if math.isfinite(v) else None

        return {
            "failed": list(self.failed),
            "t_fail_s": num(self.t_fail_s),
            "t_switch_s": num(self.t_switch_s),
            "t_end_s": float(self.t[-1]),
            "motor_lag_s": None if self.motor_lag_s is None else float(self.motor_lag_s),
            "converged": self.converged,
            "rate_tol_rad_s": float(self.rate_tol_rad_s),
            "n_tol": float(self.n_tol),
            "solver_ok": self.solver_ok,
            "message": self.message,
            "peak_thrust_n": {n: float(f) for n, f in zip(self.names, self.peak_thrust_n,
                                                           strict=True)},
            "max_thrust_n": {n: float(f) for n, f in zip(self.names, self.max_thrust_n,
                                                          strict=True)},
            "peak_body_rate_rad_s": [float(v) for v in self.peak_body_rate_rad_s],
            "final_spin_rate_rad_s": self.final_spin_rate_rad_s,
            "equilibrium_spin_rate_rad_s": float(self.target_spin_rate_rad_s),
            "spin_rate_relative_error": num(self.spin_rate_error),
            "final_deviation": [float(v) for v in self.deviation[-1]],
            "final_altitude_change_m": float(self.altitude_m[-1]),
            "min_altitude_change_m": float(np.min(self.altitude_m)),
            "final_position_m": [float(v) for v in self.position_m[-1]],
            "samples": int(self.t.size),
            "outer_loop": self.outer_loop,
            "convergence_tolerances": None if self.tolerances is None else
            {k: v for k, v in self.tolerances.items() if k != "not_settled"},
            "transient": None if self.transient is None else {
                k: (num(v) if isinstance(v, float) else v) for k, v in self.transient.items()},
            "crashed": self.crashed,
            "crash_time_s": num(self.crash_time_s),
            "crash_height_loss_m": num(self.crash_height_loss_m),
        }

    def _repr_html_(self) -> str:
        d = self.to_dict()
        rows: list[tuple[str, object]] = [
            ("failed", ", ".join(self.failed) or "none"),
            ("failure at (s)", d["t_fail_s"] if d["t_fail_s"] is not None else "-"),
            ("controller switch at (s)", d["t_switch_s"] if d["t_switch_s"] is not None else "-"),
            ("motor lag (s)", d["motor_lag_s"] if d["motor_lag_s"] is not None else "none"),
            ("converged", "yes" if self.converged else "NO"),
            ("ended", self.message if self.crashed or not self.solver_ok
             else "at the horizon"),
            ("final spin rate (rad/s)", d["final_spin_rate_rad_s"]),
            ("equilibrium spin rate (rad/s)", d["equilibrium_spin_rate_rad_s"]),
            ("peak body rates p, q, r (rad/s)",
             rates_text(d["peak_body_rate_rad_s"])),
            ("altitude change at end (m)", d["final_altitude_change_m"]),
        ]
        rows += [(f"peak thrust {n} (N)", f"{v:.3g} of {d['max_thrust_n'][n]:.3g}")
                 for n, v in d["peak_thrust_n"].items()]
        if self.transient is not None:
            rows += transient_rows(self.transient)
        return _html_table("Nonlinear simulation", rows)


def _run(veh: Vehicle, phases: list[_Phase], omega0: np.ndarray, n0: np.ndarray,
         motor_lag_s: float | None, rtol: float, max_step: float, sample_s: float,
         clip: bool = True):
    """Integrate phase by phase; return the sample arrays and solver status."""
    model = veh.model
    par = veh.par
    fmax = veh.max_thrust_n
    N = veh.n
    lag = motor_lag_s is not None and motor_lag_s > 0
    nfev = 0

    def command(phase: _Phase, omega: np.ndarray, q: np.ndarray) -> np.ndarray:
        n = up_in_body(q)
        x = phase.law.deviation(omega, n)
        f = phase.law.f_bar - x @ phase.law.K_full.T
        if clip:
            f = np.clip(f, 0.0, fmax)
        return f * phase.alive

    def rhs_for(phase: _Phase):
        def rhs(t, y):
            q = y[6:10]
            omega = y[10:13]
            fc = command(phase, omega, q)
            f = y[13:13 + N] * phase.alive if lag else fc
            dy = np.empty_like(y)
            dy[0:3] = y[3:6]
            dy[3:6] = model.translation_accel(q, f, par)
            dy[6:10] = 0.5 * quat_mul(q, np.r_[0.0, omega])
            dy[10:13] = model.omega_dot(omega, f, par)
            if lag:
                dy[13:] = (fc - y[13:]) / motor_lag_s
            return dy

        return rhs

    q0 = quat_from_up(n0)
    y = np.r_[np.zeros(6), q0, omega0]
    if lag:
        y = np.r_[y, command(phases[0], omega0, q0)]
    ts, ys, fs = [], [], []
    ok, message = True, "ok"
    for ph in phases:
        if ph.t1 <= ph.t0:
            continue
        m = max(1, round((ph.t1 - ph.t0) / sample_s))
        t_eval = np.linspace(ph.t0, ph.t1, m + 1)
        sol = solve_ivp(rhs_for(ph), (ph.t0, ph.t1), y, method="RK45", t_eval=t_eval,
                        rtol=rtol, atol=rtol * 1e-3, max_step=max_step)
        nfev += sol.nfev
        if sol.status != 0:
            ok, message = False, sol.message
        Y = sol.y.T
        start = 0 if not ts else 1  # the phase boundary sample belongs to the earlier phase
        Tk, Yk = sol.t[start:], Y[start:]
        if lag:
            Fk = Yk[:, 13:] * ph.alive
        else:
            Fk = np.array([command(ph, yy[10:13], yy[6:10]) for yy in Yk]).reshape(-1, N)
        ts.append(Tk)
        ys.append(Yk)
        fs.append(Fk)
        if not ok:
            break
        y = Y[-1].copy()
        y[6:10] /= np.linalg.norm(y[6:10])
    return np.concatenate(ts), np.vstack(ys), np.vstack(fs), ok, message, nfev


def _result(veh, failed, t_fail, t_switch, motor_lag_s, law: _Law, eq_spin: float,
            run, rate_tol, n_tol, circle_m: float = 0.0) -> SimulationResult:
    """Result of a run without outer loops; converged only when attitude, rates, yaw rate,
    position, height and velocity all settle (:func:`_transient_flags`)."""
    t, Y, F, ok, message, nfev = run
    quat = Y[:, 6:10] / np.linalg.norm(Y[:, 6:10], axis=1, keepdims=True)
    omega = Y[:, 10:13]
    n = up_in_body(quat)
    dev = law.deviation(omega, n).reshape(-1, 4)
    last = t >= t[-1] - CONVERGENCE_WINDOW_S - 1e-12
    spin = np.einsum("ij,ij->i", omega, n)
    bad, tol = _transient_flags(Y[:, 0:3], Y[:, 3:6], dev, spin, eq_spin, circle_m, Y[0, 0:3])
    converged = bool(ok and not any(np.any(v[last]) for v in bad.values()))
    tol["not_settled"] = sorted(k for k, v in bad.items() if np.any(v[last]))
    return SimulationResult(
        names=veh.names, failed=tuple(failed), t_fail_s=float(t_fail), t_switch_s=float(t_switch),
        motor_lag_s=motor_lag_s, t=t, position_m=Y[:, 0:3], velocity_m_s=Y[:, 3:6],
        quaternion=quat, omega_rad_s=omega, n=n, thrust_n=F, max_thrust_n=veh.max_thrust_n,
        target_omega_rad_s=law.omega_bar, target_n_bar=law.n_bar,
        target_spin_rate_rad_s=float(eq_spin), deviation=dev, converged=converged,
        rate_tol_rad_s=float(rate_tol), n_tol=float(n_tol), solver_ok=ok, message=message,
        n_rhs_evaluations=int(nfev), tolerances=tol, spin_about_command_rad_s=spin,
    )


def _start(eq: E.Equilibrium, initial_disturbance) -> tuple[np.ndarray, np.ndarray]:
    d = np.asarray(initial_disturbance, float)
    if d.shape != (4,):
        raise ValueError(f"initial_disturbance: {d.tolist()!r} -> 4 numbers (dp, dq rad/s; "
                         "dn_x, dn_y)")
    omega0 = np.asarray(eq.omega_bar_rad_s, float) + np.r_[d[0], d[1], 0.0]
    n = np.asarray(eq.n_bar, float) + np.r_[d[2], d[3], 0.0]
    if n[0] ** 2 + n[1] ** 2 >= 1.0:
        raise ValueError("initial_disturbance tilts n beyond the horizontal")
    n[2] = math.sqrt(1.0 - n[0] ** 2 - n[1] ** 2)
    return omega0, n


# --- the closed loop as flown: outer loops, recovery law, motor lag and idle thrust ---

#: Convergence tolerances of a flown run (common practice, no source): tilt error of the thrust
#: axis (components of n), body-rate and spin-rate error (absolute floor, rad/s, and fraction of
#: the equilibrium spin rate), horizontal position and height error (m), speed (m/s). The
#: position and speed tolerances grow by the radius and speed of the relaxed-hover circle.
TILT_TOL = 0.03
RATE_FLOOR_RAD_S = 0.05
RATE_FRACTION = 0.02
POSITION_TOL_M = 0.25
HEIGHT_TOL_M = 0.1
SPEED_TOL_M_S = 0.1
#: Horizon of a flown run, in multiples of the longest time constant (slowest closed-loop pole
#: of the inner and outer loops, and the spin-up time constant J_zz / gamma_z).
HORIZON_TIME_CONSTANTS = 6.0
#: Longest run after the failure, in s (5 min: far past any failure transient worth flying).
HORIZON_MAX_S = 300.0
#: Outer loops: natural frequency of the height loop as a fraction of the slowest attitude pole's
#: decay rate, its ceiling (rad/s), the horizontal loop at 0.75 of it, damping ratio 1, and the
#: largest tilt of the commanded thrust direction (common practice, no source).
OUTER_FRACTION = 0.25
OUTER_MAX_RAD_S = 2.0
MAX_COMMAND_TILT_DEG = 25.0
#: Relative tolerance of a flown run's integrator (the transient summary agrees with 1e-6 to
#: four digits on the test quad; a test checks it).
FLOWN_RTOL = 1e-4
#: Largest integration step of a flown run, s (the step is set by the RK45 error control; this
#: only bounds it).
FLOWN_MAX_STEP_S = 0.05
#: Spin-rate grid of the recovery schedule (fractions of the relaxed-hover spin rate).
SCHEDULE_FRACTIONS = (0.0, 0.1, 0.25, 0.5, 0.75, 1.0)
#: Lowest thrust of a scheduled operating point, as a fraction of f_max (keeps d sqrt(f) / d f
#: finite in the linearisation).
SCHEDULE_FLOOR_FRACTION = 0.03


@dataclass(frozen=True)
class OuterLoop:
    """Height and horizontal-position loops (PD on position error, per world axis).

    ``a_des = -k_p (r - r_ref) - k_d v``, horizontal part limited to the tilt
    :attr:`max_tilt_rad` of the commanded thrust direction ``d = (a_des + g e_z) / |.|``; the
    collective thrust is scaled by ``|a_des + g e_z| / g``.
    """

    kp_xy: float
    kd_xy: float
    kp_z: float
    kd_z: float
    max_tilt_rad: float

    @classmethod
    def for_inner(cls, slowest_decay_1_s: float) -> OuterLoop:
        """Gains from the slowest attitude pole: height at ``OUTER_FRACTION`` of its decay rate
        (at most ``OUTER_MAX_RAD_S``), horizontal at 0.75 of that, both damping ratio 1.

        Parameters
        ----------
        slowest_decay_1_s : float
            Decay rate of the slowest attitude pole, in 1/s.
        """
        wz = min(OUTER_FRACTION * slowest_decay_1_s, OUTER_MAX_RAD_S)
        wxy = 0.75 * wz
        return cls(wxy**2, 2 * wxy, wz**2, 2 * wz, math.radians(MAX_COMMAND_TILT_DEG))

    @property
    def slowest_rate_1_s(self) -> float:
        """Decay rate of the slowest outer-loop pole (the horizontal double pole), in 1/s."""
        return math.sqrt(self.kp_xy)


@dataclass(frozen=True)
class _Schedule:
    """``f_cmd = s f_bar(w) - K(w) x`` with gains interpolated in the measured spin ``w``."""

    spin_grid: np.ndarray  # (M,) ascending |w| fraction grid times w_final
    f_bar: np.ndarray  # (M, N)
    K: np.ndarray  # (M, N, 4 + N) rotor rows in file order; columns (p, q, nx, ny, f_0 ..)
    omega_bar: np.ndarray  # (M, 3)
    n_bar: np.ndarray  # (M, 3)

    def at(self, w: float):
        g = self.spin_grid
        m = g.size
        if m == 1 or g[-1] == 0:
            return self.f_bar[0], self.K[0], self.omega_bar[0], self.n_bar[0]
        frac = w / g[-1]
        fr = self._fractions
        if frac <= 0.0:
            j, a = 0, 0.0
        elif frac >= 1.0:
            j, a = m - 2, 1.0
        else:
            j = 0
            while j < m - 2 and fr[j + 1] < frac:
                j += 1
            a = (frac - fr[j]) / (fr[j + 1] - fr[j])
        b = 1.0 - a
        return (b * self.f_bar[j] + a * self.f_bar[j + 1], b * self.K[j] + a * self.K[j + 1],
                b * self.omega_bar[j] + a * self.omega_bar[j + 1],
                b * self.n_bar[j] + a * self.n_bar[j + 1])

    @property
    def _fractions(self) -> list:
        g = self.spin_grid
        return (g / g[-1]).tolist()


def _full_gain(eq: E.Equilibrium, ctl: C.LinearControl, n: int) -> np.ndarray:
    K = np.zeros((n, 4 + n))
    w = np.flatnonzero(eq.working)
    K[np.ix_(w, np.arange(4))] = ctl.K[:, :4]
    if ctl.has_motor_lag:
        K[np.ix_(w, 4 + w)] = ctl.K[:, 4:]
    return K


def _single(eq: E.Equilibrium, ctl: C.LinearControl, n: int) -> _Schedule:
    return _Schedule(np.array([eq.spin_rate_rad_s]), np.nan_to_num(eq.thrust_n)[None],
                     _full_gain(eq, ctl, n)[None], np.asarray(eq.omega_bar_rad_s, float)[None],
                     np.asarray(eq.n_bar, float)[None])


def _spin_up_point(veh: Vehicle, eq: E.Equilibrium, frac: float) -> E.Equilibrium:
    """Operating point along the spin-up: spin ``frac * w_bar`` about ``n(frac)``.

    ``n(frac)`` turns from body z (level) to ``n_bar`` with the spin; the working thrusts solve
    the x, y moment balance and the vertical force (the yaw moment is left unbalanced: it is
    what spins the vehicle up) by Newton steps of least change from the relaxed-hover thrusts,
    kept within ``[SCHEDULE_FLOOR_FRACTION f_max, f_max]``.
    """
    nb = (1.0 - frac) * np.array([0.0, 0.0, 1.0]) + frac * np.asarray(eq.n_bar, float)
    nb /= np.linalg.norm(nb)
    w = frac * eq.spin_rate_rad_s
    work = np.flatnonzero(eq.working)
    f = np.nan_to_num(eq.thrust_n).copy()
    fmax = veh.max_thrust_n
    fmin = np.maximum(_min_thrust(veh), SCHEDULE_FLOOR_FRACTION * fmax)
    rows = [0, 1, 3]
    for _ in range(30):
        z = np.r_[w, nb[0], nb[1], f]
        res = np.asarray(veh.model.eq_residual(z, veh.par), float)[rows]
        if np.linalg.norm(res) < 1e-10 * veh.weight_n:
            break
        J = np.asarray(veh.model.eq_jacobian(z, veh.par), float)[rows][:, 3 + work]
        step = -np.linalg.lstsq(J, res, rcond=None)[0]
        f[work] = np.clip(f[work] + step, fmin[work], fmax[work])
    return dataclasses.replace(eq, omega_bar_rad_s=w * nb, n_bar=nb, thrust_n=f,
                               spin_rate_rad_s=float(w))


def recovery_schedule(veh: Vehicle, eq: E.Equilibrium, ctl: C.LinearControl,
                      tau_s: np.ndarray | None = None) -> _Schedule:
    """Gain schedule of the recovery law over the spin-up, ending at the relaxed hover ``eq``.

    One LQR (the design's weights and motor lag) per point of :data:`SCHEDULE_FRACTIONS`
    (:func:`_spin_up_point`); the last point is ``eq`` itself with its LQR ``ctl``. Points
    where no stabilising LQR exists (or scipy's Riccati solver has to perturb the problem) are
    left out.

    Parameters
    ----------
    veh : Vehicle
        The vehicle.
    eq : Equilibrium
        Relaxed-hover equilibrium of the failure set.
    ctl : LinearControl
        Its LQR.
    tau_s : ndarray (N,) or None
        Motor time constants of every rotor the schedule's LQRs assume, in s (None: the
        design's).
    """
    n = veh.n
    if abs(eq.spin_rate_rad_s) < 1e-9:
        return _single(eq, ctl, n)
    pts = []
    for frac in SCHEDULE_FRACTIONS[:-1]:
        op = _spin_up_point(veh, eq, frac)
        with warnings.catch_warnings():
            # a Riccati solution scipy has to perturb is not one to fly
            warnings.simplefilter("error", RuntimeWarning)
            try:
                c = C.design_control(veh, op, with_robustness=False,
                                     tau_s=None if tau_s is None else tau_s[op.working])
            except RuntimeWarning:
                continue
        if c.K is not None:
            pts.append((op, c))
    pts.append((eq, ctl))
    return _Schedule(np.array([op.spin_rate_rad_s for op, _ in pts]),
                     np.array([np.nan_to_num(op.thrust_n) for op, _ in pts]),
                     np.array([_full_gain(op, c, n) for op, c in pts]),
                     np.array([np.asarray(op.omega_bar_rad_s, float) for op, _ in pts]),
                     np.array([np.asarray(op.n_bar, float) for op, _ in pts]))


def _min_thrust(veh: Vehicle) -> np.ndarray:
    return np.array([r.min_thrust_n for r in veh.design.rotors])


def _motor_tau(veh: Vehicle, motor_lag_s: float | None) -> np.ndarray:
    if motor_lag_s is not None:
        return np.full(veh.n, float(motor_lag_s))
    return np.array([r.motor_time_constant_s for r in veh.design.rotors])


@dataclass(frozen=True)
class _Segment:
    t0: float
    t1: float
    law: _Schedule
    alive: np.ndarray
    scale_max: float = 1.5


def _segment(veh: Vehicle, t0: float, t1: float, law: _Schedule, alive) -> _Segment:
    """A run segment; the collective scale is capped so the feed-forward stays within 95 % of
    the busiest rotor's f_max (at most 1.5)."""
    fb = np.max(law.f_bar, axis=0)
    use = alive & (fb > 0)
    cap = 0.95 * float(np.min(veh.max_thrust_n[use] / fb[use])) if np.any(use) else 1.5
    return _Segment(t0, t1, law, np.asarray(alive, bool), min(1.5, cap))


class _Flight:
    """The controller and plant of a flown run (one object, used by the integrator and to
    recover the commands at the samples)."""

    def __init__(self, veh: Vehicle, tau: np.ndarray, outer: OuterLoop | None,
                 ref_m: np.ndarray) -> None:
        self.veh, self.model, self.par = veh, veh.model, veh.par
        self.N = veh.n
        self.tau = tau
        self.lagged = tau > 0
        self.fmax = veh.max_thrust_n
        self.fmin = _min_thrust(veh)
        self.g = veh.design.gravity_m_s2
        self.outer = outer
        self.ref = ref_m
        self.tan_tilt = math.tan(outer.max_tilt_rad) if outer is not None else 0.0
        self.any_lag = bool(np.any(self.lagged))
        self.lag_f = self.lagged.astype(float)
        self._x = np.zeros(4 + self.N)

    def direction(self, r, v):
        """Commanded thrust direction (world) and collective scale."""
        if self.outer is None:
            return (0.0, 0.0, 1.0), 1.0
        o = self.outer
        ref = self.ref
        ax = -o.kp_xy * (r[0] - ref[0]) - o.kd_xy * v[0]
        ay = -o.kp_xy * (r[1] - ref[1]) - o.kd_xy * v[1]
        az = max(self.g - o.kp_z * (r[2] - ref[2]) - o.kd_z * v[2], 0.2 * self.g)
        ah = math.hypot(ax, ay)
        lim = az * self.tan_tilt
        if ah > lim:
            ax, ay = ax * lim / ah, ay * lim / ah
        norm = math.sqrt(ax * ax + ay * ay + az * az)
        return (ax / norm, ay / norm, az / norm), norm / self.g

    def command(self, seg: _Segment, y: np.ndarray):
        """Clipped and raw thrust commands, the reduced state x, the measured spin rate and the
        commanded direction in body axes."""
        N = self.N
        (dx, dy, dz), scale = self.direction(y[0:3], y[3:6])
        qw, qx, qy, qz = y[6:10]
        s2 = qw * qw + qx * qx + qy * qy + qz * qz
        # n_d = R(q)^T d (Diebel eq. 125, homogeneous form divided by |q|^2)
        ndx = ((qw * qw + qx * qx - qy * qy - qz * qz) * dx + 2 * (qx * qy + qw * qz) * dy
               + 2 * (qx * qz - qw * qy) * dz) / s2
        ndy = (2 * (qx * qy - qw * qz) * dx + (qw * qw - qx * qx + qy * qy - qz * qz) * dy
               + 2 * (qy * qz + qw * qx) * dz) / s2
        ndz = (2 * (qx * qz + qw * qy) * dx + 2 * (qy * qz - qw * qx) * dy
               + (qw * qw - qx * qx - qy * qy + qz * qz) * dz) / s2
        p, q, r = y[10], y[11], y[12]
        w = p * ndx + q * ndy + r * ndz
        f_bar, K, om_bar, n_bar = seg.law.at(w)
        if scale > seg.scale_max:
            scale = seg.scale_max
        ff = scale * f_bar
        x = self._x
        x[0] = p - om_bar[0]
        x[1] = q - om_bar[1]
        x[2] = ndx - n_bar[0]
        x[3] = ndy - n_bar[1]
        if self.any_lag:
            x[4:] = (y[13:13 + N] - ff) * self.lag_f
        raw = ff - K @ x
        c = np.minimum(np.maximum(raw, self.fmin), self.fmax) * seg.alive
        return c, raw, x.copy(), w, (ndx, ndy, ndz)

    def rhs_for(self, seg: _Segment):
        model, par, N = self.model, self.par, self.N
        lagged, any_lag = self.lagged, self.any_lag
        inv_tau = np.where(lagged, 1.0 / np.where(lagged, self.tau, 1.0), 0.0)
        alive = seg.alive.astype(float)

        def rhs(t, y):
            c = self.command(seg, y)[0]
            f = (np.where(lagged, y[13:13 + N], c) if any_lag else c) * alive
            dy = np.empty_like(y)
            q = y[6:10]
            omega = y[10:13]
            dy[0:3] = y[3:6]
            dy[3:6] = model.translation_accel(q, f, par)
            dy[6:10] = 0.5 * quat_mul(q, np.r_[0.0, omega])
            dy[10:13] = model.omega_dot(omega, f, par)
            if any_lag:
                dy[13:] = (c - y[13:]) * inv_tau
            return dy

        return rhs


def crash_event(crash_height_loss_m: float):
    """Terminal ``solve_ivp`` event: the centre of mass has sunk ``crash_height_loss_m``
    below its start height (``z = 0``); zero at ``z = -crash_height_loss_m``, crossing
    downwards.

    Parameters
    ----------
    crash_height_loss_m : float
        The crash floor, in m below the start height.
    """
    floor = -float(crash_height_loss_m)

    def crashed(t, y):
        return y[2] - floor

    crashed.terminal = True
    crashed.direction = -1.0
    return crashed


def _fly(flight: _Flight, segments: list[_Segment], omega0, n0, f0, rtol, max_step, sample_s,
         crash_height_loss_m: float = math.inf):
    """Integrate segment by segment; stop at the crash event (:func:`crash_event`).

    Returns the samples, their segment index, the solver status and message, the number of
    right-hand-side evaluations and the crash time (nan: no crash). A crashed run ends with
    the sample at the event itself.
    """
    q0 = quat_from_up(n0)
    y = np.r_[np.zeros(6), q0, omega0, f0 if flight.any_lag else []]
    ts, ys, segs = [], [], []
    ok, message, nfev = True, "ok", 0
    t_crash = math.nan
    events = crash_event(crash_height_loss_m) if math.isfinite(crash_height_loss_m) else None
    for k, seg in enumerate(segments):
        if seg.t1 <= seg.t0:
            continue
        m = max(1, round((seg.t1 - seg.t0) / sample_s))
        t_eval = np.linspace(seg.t0, seg.t1, m + 1)
        sol = solve_ivp(flight.rhs_for(seg), (seg.t0, seg.t1), y, method="RK45", t_eval=t_eval,
                        rtol=rtol, atol=rtol * 1e-3, max_step=max_step, events=events)
        nfev += sol.nfev
        if sol.status == -1:
            ok, message = False, sol.message
        start = 0 if not ts else 1
        tk, yk = sol.t[start:], sol.y.T[start:]
        if sol.status == 1:  # the crash event: keep the state where the flight ended
            t_crash = float(sol.t_events[0][0])
            yc = sol.y_events[0][0]
            if tk.size and tk[-1] >= t_crash:
                tk, yk = tk[:-1], yk[:-1]
            tk, yk = np.r_[tk, t_crash], np.vstack([yk, yc])
        ts.append(tk)
        ys.append(yk)
        segs.append(np.full(tk.size, k))
        if not ok or sol.status == 1 or sol.y.shape[1] == 0:
            break
        y = sol.y.T[-1].copy()
        y[6:10] /= np.linalg.norm(y[6:10])
    return (np.concatenate(ts), np.vstack(ys), np.concatenate(segs), ok, message, nfev,
            t_crash)


def rates_text(rates) -> str:
    """Body rates as text, 3 significant digits; an entry below 1e-9 of the largest prints as 0
    (rounding noise of a symmetric case, e.g. 3e-15 beside 7.38 rad/s)."""
    big = max((abs(float(v)) for v in rates), default=0.0)
    return ", ".join("0" if abs(float(v)) <= 1e-9 * big else f"{float(v):.3g}" for v in rates)


def horizon_s(veh: Vehicle, ctl_hover: C.LinearControl, ctl_fail: C.LinearControl | None,
              outer: OuterLoop | None) -> tuple[float, float]:
    """Run length after the failure and the longest time constant it is made of, in s.

    ``HORIZON_TIME_CONSTANTS`` times the longest of: the slowest attitude pole (hover and
    relaxed hover), the slowest outer-loop pole and the spin-up time constant ``J_zz / gamma_z``,
    at most ``HORIZON_MAX_S`` (a nearly undamped spin-up or pole would otherwise ask for a run
    of years; a run cut there that has not settled fails "recovery converged").

    Parameters
    ----------
    veh : Vehicle
        The vehicle (inertia and drag for the spin-up).
    ctl_hover, ctl_fail : LinearControl
        Loops before and after the failure (``ctl_fail`` None: no failure).
    outer : OuterLoop or None
        The outer loops.
    """
    taus = []
    for c in (ctl_hover, ctl_fail):
        if c is not None and c.closed_loop_poles is not None:
            taus.append(1.0 / float(np.min(-c.closed_loop_poles.real)))
    if outer is not None:
        taus.append(1.0 / outer.slowest_rate_1_s)
    if ctl_fail is not None:
        gz = veh.design.aero.drag_torque_coeff[2]
        if gz > 0:
            taus.append(veh.mp.inertia_kg_m2[2, 2] / gz)
    longest = max(taus) if taus else 1.0
    return min(HORIZON_TIME_CONSTANTS * longest, HORIZON_MAX_S), longest


def simulate_failure(veh: Vehicle, failed=(), t_fail: float = 0.5,
                     detect_delay_s: float | None = None, t_end: float | None = None,
                     motor_lag_s: float | None = None, thrust_ratio: dict | None = None,
                     initial_disturbance=(0.0, 0.0, 0.0, 0.0), *, outer_loop: bool = True,
                     recovery: str = "scheduled", rtol: float = FLOWN_RTOL,
                     max_step: float = FLOWN_MAX_STEP_S, sample_s: float | None = None,
                     rate_tol_rad_s: float = RATE_TOL_RAD_S,
                     n_tol: float = N_TOL,
                     crash_height_loss_m: float | None = None) -> SimulationResult:
    """Hover, lose the rotors ``failed`` at ``t_fail``, recover after the detection delay.

    The controller (DESIGN.md, "Control architecture in the nonlinear simulation"):

    * outer loops (:class:`OuterLoop`): height and horizontal position hold about the start
      point command the thrust direction ``d`` (world) and the collective scale ``s``;
    * attitude: ``f_cmd = s f_bar - K x`` with ``x = (p - p_bar, q - q_bar, n_dx - n_bar_x,
      n_dy - n_bar_y[, f - s f_bar])``, ``n_d = R^T d`` (the commanded direction in body axes),
      clipped to ``[min_thrust_n, max_thrust_n]``; failed rotors give no thrust from ``t_fail``;
    * before the failure and until ``detect_delay_s`` after it: the hover LQR;
    * then the recovery law, ``recovery = "scheduled"``: gain scheduling on the measured spin
      rate ``w = omega . n_d`` (Rugh & Shamma 2000). The reduced model assumes the yaw rate at
      its equilibrium value, but after a failure it spins up from 0 with time constant about
      ``J_zz / gamma_z``; the schedule holds LQR gains designed at operating points along the
      spin-up (:func:`recovery_schedule`: spin ``frac w_bar`` about an axis turning from body z
      to ``n_bar``, thrusts balancing the x, y moments and the weight) and interpolates gains,
      thrusts and rate references linearly in ``w``. ``recovery = "switch"`` applies the
      relaxed-hover LQR at once (the earlier behaviour);
    * motor lag (per rotor ``motor_time_constant_s``, or ``motor_lag_s`` for all) and idle
      thrust in the plant; the controller measures the thrusts when it has lag states.

    ``outer_loop=False, recovery="switch"`` with no lag is the earlier simulation (no height
    or position control: the vehicle sinks and drifts, and the run is then not converged).

    The flight ends early when the vehicle has crashed: a terminal event stops the integration
    when the centre of mass has sunk ``crash_height_loss_m`` below its start height
    (:func:`crash_event`; default the design's ``[review] crash_height_loss_m``, 20 m, common
    practice, no source). The result is then ``crashed``, never converged, its ``message``
    says "crashed at t = ... s after falling ... m", and its last sample is the state at the
    event.

    Parameters
    ----------
    veh : Vehicle
        The vehicle.
    failed : sequence of str
        Names of the rotors that fail (``()``: hover only).
    t_fail : float
        Time of the failure, in s.
    detect_delay_s : float or None
        Time from the failure to the recovery law, in s (None: the design's
        ``[control] failure_detection_delay_s``).
    t_end : float or None
        End of the run, in s (None: ``t_fail + detect_delay_s`` plus the horizon of
        :func:`horizon_s`).
    motor_lag_s : float or None
        Motor time constant of every rotor, in s (None: the design's per-rotor values).
    thrust_ratio : dict or None
        Fixed thrust ratios of the relaxed-hover equilibrium (None: least effort).
    initial_disturbance : sequence of 4 floats
        Offset of ``(p, q, n_x, n_y)`` from the hover equilibrium at ``t = 0``, in rad/s, rad/s,
        1, 1 (``n_z`` is renormalised).
    outer_loop : bool
        Fly the height and horizontal-position loops.
    recovery : str
        ``"scheduled"`` or ``"switch"``.
    rtol : float
        Relative tolerance of ``solve_ivp`` (RK45); the absolute one is ``1e-3 rtol``.
    max_step : float
        Largest integration step, in s.
    sample_s : float or None
        Output sample interval, in s (None: ``SAMPLE_S``, or 0.01 s for runs over 5 s).
    rate_tol_rad_s, n_tol : float
        Kept for callers of the earlier signature; the convergence tolerances are the module's
        ``TILT_TOL``, ``RATE_FLOOR_RAD_S`` .. ``SPEED_TOL_M_S``.
    crash_height_loss_m : float or None
        Height below the start at which the run counts as crashed and stops, in m (None: the
        design's ``[review] crash_height_loss_m``; ``math.inf``: never stop early).

    Returns
    -------
    SimulationResult

    Raises
    ------
    EquilibriumNotFound
        When the hover or the relaxed-hover equilibrium, or its LQR, does not exist.
    ValueError
        For an unknown ``recovery`` or a bad ``initial_disturbance``.

    References
    ----------
    W. J. Rugh, J. S. Shamma, "Research on gain scheduling", Automatica 36(10), 2000,
    sec. 2-3 (linearisation-based gain scheduling) (from memory).
    M. W. Mueller, R. D'Andrea, IEEE ICRA 2014, sec. V (outer translational loop commanding the
    direction of the averaged thrust) (from memory).
    """
    if recovery not in ("scheduled", "switch"):
        raise ValueError(f"recovery: {recovery!r} -> 'scheduled' or 'switch'")
    del rate_tol_rad_s, n_tol
    failed = tuple(failed)
    delay = (veh.design.control.failure_detection_delay_s if detect_delay_s is None
             else float(detect_delay_s))
    tau = _motor_tau(veh, motor_lag_s)
    eq0 = E.solve(veh)
    ctl0 = _controller_lag(eq0, veh, "hover", tau)
    omega0, n0 = _start(eq0, initial_disturbance)
    all_alive = np.ones(veh.n, bool)
    law0 = _single(eq0, ctl0, veh.n)
    ctl1 = eq1 = None
    if failed:
        eq1 = E.solve(veh, failed, thrust_ratio=thrust_ratio)
        ctl1 = _controller_lag(eq1, veh, "relaxed hover with " + ", ".join(failed) + " failed",
                               tau)
    decays = [float(np.min(-c.closed_loop_poles.real)) for c in (ctl0, ctl1) if c is not None]
    outer = OuterLoop.for_inner(min(decays)) if outer_loop else None
    t_fail = max(float(t_fail), 0.0)
    t_sw = t_fail + max(delay, 0.0)
    if t_end is None:
        h, _ = horizon_s(veh, ctl0, ctl1, outer)
        t_end = (t_sw if failed else 0.0) + h
    t_end = float(t_end)
    if sample_s is None:
        sample_s = SAMPLE_S if t_end <= 5.0 else 0.01
    flight = _Flight(veh, tau, outer, np.zeros(3))
    if not failed:
        segs = [_segment(veh, 0.0, t_end, law0, all_alive)]
        target_eq, target_law, t_fail_v, t_sw_v = eq0, law0, math.nan, math.nan
    else:
        alive = veh.working_mask(failed)
        t_fail = min(t_fail, t_end)
        t_sw = min(t_sw, t_end)
        law1 = recovery_schedule(veh, eq1, ctl1, tau) if recovery == "scheduled" else _single(
            eq1, ctl1, veh.n)
        segs = [_segment(veh, 0.0, t_fail, law0, all_alive),
                _segment(veh, t_fail, t_sw, law0, alive), _segment(veh, t_sw, t_end, law1, alive)]
        target_eq, target_law, t_fail_v, t_sw_v = eq1, law1, t_fail, t_sw
    f0 = np.nan_to_num(eq0.thrust_n)
    floor = (veh.design.review.crash_height_loss_m if crash_height_loss_m is None
             else float(crash_height_loss_m))
    t, Y, seg_idx, ok, message, nfev, t_crash = _fly(flight, segs, omega0, n0, f0, rtol,
                                                     max_step, sample_s, floor)
    return _flown_result(veh, flight, segs, failed, t_fail_v, t_sw_v, tau, target_eq,
                         target_law, t, Y, seg_idx, ok, message, nfev, outer, t_crash, floor)


def _controller_lag(eq: E.Equilibrium, veh: Vehicle, what: str, tau: np.ndarray):
    if not eq.found:
        raise EquilibriumNotFound(f"{what}: {eq.reason}")
    ctl = C.design_control(veh, eq, tau_s=tau[eq.working], with_robustness=False)
    if ctl.K is None:
        raise EquilibriumNotFound(f"{what}: no stabilising LQR ({ctl.note})")
    return ctl


def _flown_result(veh, flight, segs, failed, t_fail, t_sw, tau, eq, law, t, Y, seg_idx, ok,
                  message, nfev, outer, t_crash=math.nan, floor=math.inf) -> SimulationResult:
    N = veh.n
    quat = Y[:, 6:10] / np.linalg.norm(Y[:, 6:10], axis=1, keepdims=True)
    omega = Y[:, 10:13]
    n = up_in_body(quat)
    used = segs  # _fly numbers the samples by the segment's place in segs (empty ones too)
    C_, RAW, X, ND, W = [], [], [], [], []
    for k, y in zip(seg_idx, Y, strict=True):
        c, raw, x, w, nd = flight.command(used[k], y)
        C_.append(c)
        RAW.append(raw)
        X.append(x)
        ND.append(nd)
        W.append(w)
    cmd, raw, X, ND, W = map(np.array, (C_, RAW, X, ND, W))
    alive_s = np.array([used[k].alive for k in seg_idx])
    F = (np.where(flight.lagged, Y[:, 13:13 + N], cmd) if flight.any_lag else cmd) * alive_s
    # deviation about the final operating point (for the record and the linear comparison)
    dev = np.column_stack([omega[:, 0] - law.omega_bar[-1, 0], omega[:, 1] - law.omega_bar[-1, 1],
                           ND[:, 0] - law.n_bar[-1, 0], ND[:, 1] - law.n_bar[-1, 1]])
    ref = flight.ref
    bad, tol = _transient_flags(Y[:, 0:3], Y[:, 3:6], dev, W, eq.spin_rate_rad_s,
                                float(eq.circle_radius_m) if eq.found else 0.0, ref)
    t0 = t_fail if math.isfinite(t_fail) else 0.0
    return _assemble(veh, failed, t_fail, t_sw, tau, t, Y, quat, omega, n, F, cmd, raw, alive_s,
                     eq, law, dev, bad, tol, ok, message, nfev, t0, outer, W, t_crash, floor)


def _transient_flags(pos, vel, dev, spin, w_bar, circle_m, ref):
    rate_tol = max(RATE_FLOOR_RAD_S, RATE_FRACTION * abs(w_bar))
    pos_tol = POSITION_TOL_M + circle_m
    speed_tol = SPEED_TOL_M_S + abs(w_bar) * circle_m
    e = pos - ref
    bad = {
        "tilt": np.max(np.abs(dev[:, 2:4]), axis=1) >= TILT_TOL,
        "body rates": np.max(np.abs(dev[:, 0:2]), axis=1) >= rate_tol,
        "yaw rate": np.abs(spin - w_bar) >= rate_tol,
        "position": np.hypot(e[:, 0], e[:, 1]) >= pos_tol,
        "height": np.abs(e[:, 2]) >= HEIGHT_TOL_M,
        "velocity": np.linalg.norm(vel, axis=1) >= speed_tol,
    }
    tol = {"tilt": TILT_TOL, "body_rates_rad_s": rate_tol, "yaw_rate_rad_s": rate_tol,
           "position_m": pos_tol, "height_m": HEIGHT_TOL_M, "velocity_m_s": speed_tol}
    return bad, tol


def _assemble(veh, failed, t_fail, t_sw, tau, t, Y, quat, omega, n, F, cmd, raw, alive_s, eq,
              law, dev, bad, tol, ok, message, nfev, t0, outer, spin, t_crash=math.nan,
              floor=math.inf):
    last = t >= t[-1] - CONVERGENCE_WINDOW_S - 1e-12
    any_bad = np.zeros(t.size, bool)
    for v in bad.values():
        any_bad |= v
    crashed = math.isfinite(t_crash)
    if crashed:
        message = crash_message(t_crash, t0, float(Y[0, 2] - Y[-1, 2]), floor)
    converged = bool(ok and not crashed and not np.any(any_bad[last]))
    after = t >= t0
    viol = np.flatnonzero(any_bad & after)
    if not converged:
        settle = math.nan
    elif viol.size == 0:
        settle = 0.0
    else:
        settle = float(t[min(viol[-1] + 1, t.size - 1)] - t0)
    fmin = _min_thrust(veh)
    at_bound = ((raw < fmin - 1e-9) | (raw > veh.max_thrust_n + 1e-9)) & alive_s
    dt = np.diff(t, append=t[-1])
    sat_time = float(np.sum(dt[np.any(at_bound, axis=1) & after]))
    a = after
    nz = n[a, 2]
    tilt = np.degrees(np.arccos(np.clip(nz, -1.0, 1.0)))
    e = Y[a, 0:3]
    summary = {
        "peak_tilt_deg": float(np.max(tilt)),
        "least_n_z": float(np.min(nz)),
        "inverted": bool(np.min(nz) < 0),
        "height_lost_m": float(max(0.0, -np.min(e[:, 2] - Y[0, 2]))),
        "largest_horizontal_excursion_m": float(np.max(np.hypot(e[:, 0] - Y[0, 0],
                                                                e[:, 1] - Y[0, 1]))),
        "time_to_settle_s": settle,
        "time_saturated_s": sat_time,
        "peak_body_rate_rad_s": [float(v) for v in np.max(np.abs(omega[a]), axis=0)],
        "peak_spin_rate_rad_s": float(np.max(np.abs(spin[a]))),
        "final_speed_m_s": float(np.linalg.norm(Y[-1, 3:6])),
        "not_settled": sorted(k for k, v in bad.items() if np.any(v[last])),
        "crashed": crashed,
        "crash_time_s": float(t_crash),
    }
    return SimulationResult(
        names=veh.names, failed=tuple(failed), t_fail_s=float(t_fail), t_switch_s=float(t_sw),
        motor_lag_s=float(np.max(tau)) if np.any(tau > 0) else None, t=t, position_m=Y[:, 0:3],
        velocity_m_s=Y[:, 3:6], quaternion=quat, omega_rad_s=omega, n=n, thrust_n=F,
        max_thrust_n=veh.max_thrust_n, target_omega_rad_s=law.omega_bar[-1],
        target_n_bar=law.n_bar[-1], target_spin_rate_rad_s=float(eq.spin_rate_rad_s),
        deviation=dev, converged=converged, rate_tol_rad_s=float(tol["body_rates_rad_s"]),
        n_tol=float(tol["tilt"]), solver_ok=ok, message=message, n_rhs_evaluations=int(nfev),
        tolerances=tol, transient=summary, outer_loop=outer is not None,
        command_n=cmd, spin_about_command_rad_s=spin, crashed=crashed,
        crash_time_s=float(t_crash), crash_height_loss_m=float(floor),
    )


def crash_message(t_crash_s: float, t_fail_s: float, fallen_m: float, floor_m: float) -> str:
    """The reason a flown run ended early: ``crashed at t = ... s after falling ... m``.

    Parameters
    ----------
    t_crash_s : float
        Time of the crash event, in s.
    t_fail_s : float
        Time of the failure, in s.
    fallen_m : float
        Height lost at the crash, in m.
    floor_m : float
        The crash floor (``[review] crash_height_loss_m``), in m.
    """
    return (f"crashed at t = {t_crash_s:.3g} s ({t_crash_s - t_fail_s:.3g} s after the failure) "
            f"after falling {fallen_m:.3g} m (crash floor {floor_m:g} m below the start, "
            "[review] crash_height_loss_m)")


def simulate_about(veh: Vehicle, eq: E.Equilibrium, ctl: C.LinearControl | None = None,
                   t_end: float = 5.0, initial_disturbance=(0.0, 0.0, 0.0, 0.0),
                   motor_lag_s: float | None = None, *, clip: bool = True, rtol: float = RTOL,
                   max_step: float = MAX_STEP_S, sample_s: float = SAMPLE_S,
                   rate_tol_rad_s: float = RATE_TOL_RAD_S,
                   n_tol: float = N_TOL) -> SimulationResult:
    """Start at an equilibrium plus a disturbance, under its LQR (rotors ``eq.failed`` off).

    Parameters
    ----------
    veh : Vehicle
    eq : Equilibrium
        The equilibrium (any failure set) to start from and to hold.
    ctl : LinearControl or None
        Its four-state LQR (None: :func:`kit.analysis.control.design_control` without motor
        lag); a law with motor lag states is refused (ValueError).
    t_end : float
        End of the run, in s.
    initial_disturbance : sequence of 4 floats
        Offset of ``(p, q, n_x, n_y)`` from the equilibrium, in rad/s, rad/s, 1, 1.
    motor_lag_s : float or None
        First-order motor time constant, in s.
    clip : bool
        Clip the thrust commands to ``[0, f_max]`` (False for the linear comparison).
    rtol, max_step, sample_s, rate_tol_rad_s, n_tol
        As in :func:`simulate_failure`.

    Returns
    -------
    SimulationResult
    """
    label = eq.label
    if ctl is None:
        ctl = _controller(eq, veh, label)
    elif ctl.K is None:
        raise EquilibriumNotFound(f"{label}: no stabilising LQR ({ctl.note})")
    elif ctl.has_motor_lag:
        raise ValueError(f"{label}: simulate_about flies the four-state law; a law with motor "
                         "lag states flies in simulate_failure(..., outer_loop=False)")
    law = _Law.of(eq, ctl)
    omega0, n0 = _start(eq, initial_disturbance)
    phases = [_Phase(0.0, t_end, law, eq.working.copy())]
    run = _run(veh, phases, omega0, n0, motor_lag_s, rtol, max_step, sample_s, clip=clip)
    return _result(veh, eq.failed, math.nan, math.nan, motor_lag_s, law, eq.spin_rate_rad_s,
                   run, rate_tol_rad_s, n_tol, float(eq.circle_radius_m))


@dataclass(frozen=True)
class TorqueFreeResult:
    """Torque-free rotation (no thrust, no drag): invariants along the run.

    Attributes
    ----------
    t : ndarray (T,)
        Sample times, in s.
    omega_rad_s : ndarray (T, 3)
        Body angular velocity, in rad/s.
    quaternion : ndarray (T, 4)
        Body-to-world attitude, scalar first, normalised.
    kinetic_energy_j : ndarray (T,)
        ``omega . J omega / 2``, in J.
    angular_momentum_world_n_m_s : ndarray (T, 3)
        ``R J omega``, in N m s.
    quaternion_norm_drift : float
        Largest ``| |q| - 1 |`` of the integrated (not normalised) quaternion.
    """

    t: np.ndarray
    omega_rad_s: np.ndarray
    quaternion: np.ndarray
    kinetic_energy_j: np.ndarray
    angular_momentum_world_n_m_s: np.ndarray
    quaternion_norm_drift: float

    @property
    def energy_drift(self) -> float:
        """Largest relative change of the kinetic energy."""
        e0 = self.kinetic_energy_j[0]
        return float(np.max(np.abs(self.kinetic_energy_j - e0)) / abs(e0))

    @property
    def momentum_drift(self) -> float:
        """Largest change of the world angular momentum relative to its magnitude."""
        L = self.angular_momentum_world_n_m_s
        return float(np.max(np.linalg.norm(L - L[0], axis=1)) / np.linalg.norm(L[0]))

    def to_dict(self) -> dict:
        return {
            "t_end_s": float(self.t[-1]),
            "omega0_rad_s": [float(v) for v in self.omega_rad_s[0]],
            "kinetic_energy_j": float(self.kinetic_energy_j[0]),
            "angular_momentum_world_n_m_s": [float(v) for v in
                                             self.angular_momentum_world_n_m_s[0]],
            "energy_relative_drift": self.energy_drift,
            "momentum_relative_drift": self.momentum_drift,
            "quaternion_norm_drift": float(self.quaternion_norm_drift),
        }

    def _repr_html_(self) -> str:
        d = self.to_dict()
        return _html_table("Torque-free rotation", [
            ("duration (s)", d["t_end_s"]), ("kinetic energy (J)", d["kinetic_energy_j"]),
            ("energy relative drift", d["energy_relative_drift"]),
            ("momentum relative drift", d["momentum_relative_drift"]),
        ])


def without_torques(veh: Vehicle) -> Vehicle:
    """The same vehicle (same mass properties) with zero body drag and no wheel momentum."""
    d = veh.design
    design = replace(d, aero=replace(d.aero, drag_torque_coeff=(0.0, 0.0, 0.0)))
    return replace(veh, design=design, wheel_momentum_n_m_s=0.0, _cache={})


def simulate_torque_free(veh: Vehicle, omega0, t_end: float, *, rtol: float = 1e-12,
                         atol: float = 1e-12, method: str = "DOP853",
                         n_samples: int = 401) -> TorqueFreeResult:
    """Rotation with every rotor stopped and no drag, from ``omega0`` (conservation check).

    Parameters
    ----------
    veh : Vehicle
        Its mass properties; its drag and wheel momentum are set to zero here
        (:func:`without_torques`).
    omega0 : sequence of 3 floats
        Initial body angular velocity, in rad/s.
    t_end : float
        Duration, in s.
    rtol, atol : float
        Integrator tolerances.
    method : str
        A ``solve_ivp`` method.
    n_samples : int
        Number of output samples.

    Returns
    -------
    TorqueFreeResult
    """
    v0 = without_torques(veh)
    model, par = v0.model, v0.par
    f0 = np.zeros(v0.n)
    J = v0.mp.inertia_kg_m2

    def rhs(t, y):
        q, w = y[:4], y[4:]
        return np.r_[0.5 * quat_mul(q, np.r_[0.0, w]), model.omega_dot(w, f0, par)]

    y0 = np.r_[1.0, 0.0, 0.0, 0.0, np.asarray(omega0, float)]
    t = np.linspace(0.0, t_end, n_samples)
    sol = solve_ivp(rhs, (0.0, t_end), y0, method=method, t_eval=t, rtol=rtol, atol=atol)
    if sol.status != 0:
        raise RuntimeError(f"torque-free integration failed: {sol.message}")
    Q = sol.y[:4].T
    W = sol.y[4:].T
    qn = np.linalg.norm(Q, axis=1)
    Qu = Q / qn[:, None]
    energy = 0.5 * np.einsum("ij,jk,ik->i", W, J, W)
    L = np.array([rotation_matrix(q) @ (J @ w) for q, w in zip(Qu, W, strict=True)])
    return TorqueFreeResult(sol.t, W, Qu, energy, L, float(np.max(np.abs(qn - 1.0))))

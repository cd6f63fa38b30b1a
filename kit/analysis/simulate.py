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

evaluated with the generated functions ``model.translation_accel`` and ``model.omega_dot``.
Controller (DESIGN.md, "Reduced attitude model"): ``f_cmd = f_bar - K x`` with
``x = (p - p_bar, q - q_bar, n_x - n_bar_x, n_y - n_bar_y)``, ``n = R^T e_z``, clipped to
``[0, f_max]``; failed rotors give no thrust from the failure on (at once, with or without lag).
Before the failure the gain is the hover LQR of the no-failure equilibrium; ``detect_delay_s``
after it, the relaxed-hover LQR of the failure set. Altitude is not controlled: the reduced model
has no height channel, so the height lost while the failure is undetected stays lost.

References
----------
J. Diebel, "Representing attitude: Euler angles, unit quaternions, and rotation vectors",
Stanford 2006, eq. 125 (quaternion to rotation matrix) and sec. 6 (kinematics; from memory).
M. W. Mueller and R. D'Andrea, "Stability and control of a quadrocopter despite the complete
loss of one, two, or three propellers", IEEE ICRA 2014, sec. IV-V (from memory).
Hairer, Norsett & Wanner, Solving Ordinary Differential Equations I, 2nd ed., sec. II.5
(Dormand-Prince pairs; from memory).
"""

from __future__ import annotations

import html
import math
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
    if not eq.found:
        raise EquilibriumNotFound(f"{what}: {eq.reason}")
    ctl = C.design_control(veh, eq)
    if ctl.K is None:
        raise EquilibriumNotFound(f"{what}: no stabilising LQR ({ctl.note})")
    return ctl


def _html_table(caption: str, rows: list[tuple[str, object]]) -> str:
    def cell(v: object) -> str:
        return html.escape(f"{v:.4g}" if isinstance(v, float) else str(v))

    body = "".join(f"<tr><th>{html.escape(k)}</th><td>{cell(v)}</td></tr>" for k, v in rows)
    return f"<table><caption>{html.escape(caption)}</caption><tbody>{body}</tbody></table>"


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
        ``|p - p_bar|, |q - q_bar| < rate_tol_rad_s`` and ``|n - n_bar| < n_tol`` (x, y) over
        the last :data:`CONVERGENCE_WINDOW_S`.
    solver_ok : bool
        The integrator reached ``t_end``.
    message : str
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
        }

    def _repr_html_(self) -> str:
        d = self.to_dict()
        rows: list[tuple[str, object]] = [
            ("failed", ", ".join(self.failed) or "none"),
            ("failure at (s)", d["t_fail_s"] if d["t_fail_s"] is not None else "-"),
            ("controller switch at (s)", d["t_switch_s"] if d["t_switch_s"] is not None else "-"),
            ("motor lag (s)", d["motor_lag_s"] if d["motor_lag_s"] is not None else "none"),
            ("converged", "yes" if self.converged else "NO"),
            ("final spin rate (rad/s)", d["final_spin_rate_rad_s"]),
            ("equilibrium spin rate (rad/s)", d["equilibrium_spin_rate_rad_s"]),
            ("peak body rates p, q, r (rad/s)",
             ", ".join(f"{v:.3g}" for v in d["peak_body_rate_rad_s"])),
            ("altitude change at end (m)", d["final_altitude_change_m"]),
        ]
        rows += [(f"peak thrust {n} (N)", f"{v:.3g} of {d['max_thrust_n'][n]:.3g}")
                 for n, v in d["peak_thrust_n"].items()]
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
            run, rate_tol, n_tol) -> SimulationResult:
    t, Y, F, ok, message, nfev = run
    quat = Y[:, 6:10] / np.linalg.norm(Y[:, 6:10], axis=1, keepdims=True)
    omega = Y[:, 10:13]
    n = up_in_body(quat)
    dev = law.deviation(omega, n).reshape(-1, 4)
    last = t >= t[-1] - CONVERGENCE_WINDOW_S - 1e-12
    converged = bool(ok and np.all(np.abs(dev[last, :2]) < rate_tol)
                     and np.all(np.abs(dev[last, 2:]) < n_tol))
    return SimulationResult(
        names=veh.names, failed=tuple(failed), t_fail_s=float(t_fail), t_switch_s=float(t_switch),
        motor_lag_s=motor_lag_s, t=t, position_m=Y[:, 0:3], velocity_m_s=Y[:, 3:6],
        quaternion=quat, omega_rad_s=omega, n=n, thrust_n=F, max_thrust_n=veh.max_thrust_n,
        target_omega_rad_s=law.omega_bar, target_n_bar=law.n_bar,
        target_spin_rate_rad_s=float(eq_spin), deviation=dev, converged=converged,
        rate_tol_rad_s=float(rate_tol), n_tol=float(n_tol), solver_ok=ok, message=message,
        n_rhs_evaluations=int(nfev),
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


def simulate_failure(veh: Vehicle, failed=(), t_fail: float = 0.5, detect_delay_s: float = 0.05,
                     t_end: float = 5.0, motor_lag_s: float | None = None,
                     thrust_ratio: dict | None = None,
                     initial_disturbance=(0.0, 0.0, 0.0, 0.0), *, rtol: float = RTOL,
                     max_step: float = MAX_STEP_S, sample_s: float = SAMPLE_S,
                     rate_tol_rad_s: float = RATE_TOL_RAD_S,
                     n_tol: float = N_TOL) -> SimulationResult:
    """Hover, lose the rotors ``failed`` at ``t_fail`` and switch to relaxed-hover LQR.

    Parameters
    ----------
    veh : Vehicle
    failed : sequence of str
        Names of the rotors that fail (``()``: hover only).
    t_fail : float
        Time of the failure, in s.
    detect_delay_s : float
        Time from the failure to the controller switch, in s.
    t_end : float
        End of the run, in s.
    motor_lag_s : float or None
        First-order motor time constant, in s; None for thrust that follows the command at once.
    thrust_ratio : dict or None
        Fixed thrust ratios of the relaxed-hover equilibrium (None: least effort).
    initial_disturbance : sequence of 4 floats
        Offset of ``(p, q, n_x, n_y)`` from the hover equilibrium at ``t = 0``, in rad/s, rad/s,
        1, 1 (``n_z`` is renormalised).
    rtol : float
        Relative tolerance of ``solve_ivp`` (RK45); the absolute one is ``1e-3 rtol``.
    max_step : float
        Largest integration step, in s.
    sample_s : float
        Output sample interval, in s.
    rate_tol_rad_s, n_tol : float
        Convergence tolerances on body rates (rad/s) and on ``n_x, n_y`` (1).

    Returns
    -------
    SimulationResult

    Raises
    ------
    EquilibriumNotFound
        When the hover or the relaxed-hover equilibrium, or its LQR, does not exist.
    """
    failed = tuple(failed)
    eq0 = E.solve(veh)
    law0 = _Law.of(eq0, _controller(eq0, veh, "hover"))
    omega0, n0 = _start(eq0, initial_disturbance)
    all_alive = np.ones(veh.n, bool)
    if not failed:
        phases = [_Phase(0.0, t_end, law0, all_alive)]
        run = _run(veh, phases, omega0, n0, motor_lag_s, rtol, max_step, sample_s)
        return _result(veh, failed, math.nan, math.nan, motor_lag_s, law0, eq0.spin_rate_rad_s,
                       run, rate_tol_rad_s, n_tol)
    eq1 = E.solve(veh, failed, thrust_ratio=thrust_ratio)
    law1 = _Law.of(eq1, _controller(eq1, veh, "relaxed hover with " + ", ".join(failed)
                                    + " failed"))
    alive = veh.working_mask(failed)
    t_fail = min(max(float(t_fail), 0.0), t_end)
    t_sw = min(t_fail + max(float(detect_delay_s), 0.0), t_end)
    phases = [_Phase(0.0, t_fail, law0, all_alive), _Phase(t_fail, t_sw, law0, alive),
              _Phase(t_sw, t_end, law1, alive)]
    run = _run(veh, phases, omega0, n0, motor_lag_s, rtol, max_step, sample_s)
    return _result(veh, failed, t_fail, t_sw, motor_lag_s, law1, eq1.spin_rate_rad_s, run,
                   rate_tol_rad_s, n_tol)


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
        Its LQR (None: :func:`kit.analysis.control.design_control`).
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
    law = _Law.of(eq, ctl)
    omega0, n0 = _start(eq, initial_disturbance)
    phases = [_Phase(0.0, t_end, law, eq.working.copy())]
    run = _run(veh, phases, omega0, n0, motor_lag_s, rtol, max_step, sample_s, clip=clip)
    return _result(veh, eq.failed, math.nan, math.nan, motor_lag_s, law, eq.spin_rate_rad_s,
                   run, rate_tol_rad_s, n_tol)


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

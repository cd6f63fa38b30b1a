r"""Nonlinear closed loop under filtered gusts: Monte-Carlo saturation-crossing rate against Rice.

The linear saturation risk (:mod:`kit.analysis.risk`) counts, with Rice's formula, how often the
thrust deviations of the linearised closed loop cross the margins to ``[min_thrust_n,
max_thrust_n]``. Here the same disturbance model drives the *nonlinear* attitude dynamics
(Euler's equation with rotor momentum, quaternion kinematics, motor lag) under the same LQR,
with the thrust the rotors give clipped to ``[min_thrust_n, max_thrust_n]``, and the crossings
of those levels by the commanded (unclipped) thrust are counted (with motor lag: by the motor
state, which follows the unclipped command, the rotor giving its clipped value):

.. math::

    d_{k+1} = a\, d_k + \sqrt{\tfrac{S}{2\tau_f}(1 - a^2)}\;\xi_k, \quad a = e^{-\Delta t/\tau_f},
    \qquad \hat\nu = \frac{\#\{\text{up-crossings of } f_{max} \text{ and down-crossings of }
    f_{min}\}}{\text{runs} \times T}

(the exact discretisation of the first-order filter ``tau_f d' = -d + w``, held over each
step; ``xi_k`` standard normal, seeded). The attitude states are integrated with the classical
fourth-order Runge-Kutta method, all runs at once (the generated functions broadcast). The
design's gust intensity usually gives far too few crossings to count, so the intensity is raised
by a stated factor until the linear rate is :data:`TARGET_RATE_PER_S`; the ratio
``nu_hat / nu_Rice`` at that intensity measures how far the linear figure can be trusted.

References
----------
S. O. Rice, "Mathematical analysis of random noise", Bell System Technical Journal 24 (1945),
sec. 3.3 (from memory). D. T. Gillespie, "Exact numerical simulation of the Ornstein-Uhlenbeck
process and its integral", Phys. Rev. E 54 (1996), eq. 1.8 (exact update) (from memory).
Hairer, Norsett & Wanner, Solving Ordinary Differential Equations I, 2nd ed., sec. II.1 (RK4)
(from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from kit.analysis.control import LinearControl
from kit.analysis.equilibrium import Equilibrium
from kit.analysis.risk import saturation_risk
from kit.analysis.vehicle import Vehicle

#: Linear crossing rate the gust intensity is raised to, 1/s (enough crossings to count).
TARGET_RATE_PER_S = 1.0


@dataclass(frozen=True)
class GustMonteCarlo:
    """Monte-Carlo crossing rate of the nonlinear loop and the linear Rice rate, same gusts.

    Attributes
    ----------
    case : str
        Case label.
    psd_scale : float
        Factor on the design's disturbance PSD used here.
    psd_n2_m2_s : float
        Intensity used, N^2 m^2 s.
    runs, duration_s, step_s, seed
        Number of runs, length of each after the burn-in (s), RK4 step (s), random seed.
    crossings : int
        Counted crossings over all runs.
    monte_carlo_rate_per_s, rice_rate_per_s : float
        Crossing rates, 1/s.
    ratio : float
        ``monte_carlo_rate_per_s / rice_rate_per_s``.
    standard_error_ratio : float
        ``ratio / sqrt(crossings)`` (Poisson count).
    """

    case: str
    psd_scale: float
    psd_n2_m2_s: float
    runs: int
    duration_s: float
    step_s: float
    seed: int
    crossings: int
    monte_carlo_rate_per_s: float
    rice_rate_per_s: float
    ratio: float
    standard_error_ratio: float

    def to_dict(self) -> dict:
        def f(v):
            v = float(v)
            return v if math.isfinite(v) else None

        return {"case": self.case, "psd_scale": f(self.psd_scale),
                "psd_n2_m2_s": f(self.psd_n2_m2_s), "runs": self.runs,
                "duration_s": f(self.duration_s), "step_s": f(self.step_s), "seed": self.seed,
                "crossings": self.crossings,
                "monte_carlo_rate_per_s": f(self.monte_carlo_rate_per_s),
                "rice_rate_per_s": f(self.rice_rate_per_s), "ratio": f(self.ratio),
                "standard_error_ratio": f(self.standard_error_ratio)}

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import table

        d = self.to_dict()
        rows = [("case", d["case"]), ("gust intensity used (N^2 m^2 s)", d["psd_n2_m2_s"]),
                ("factor on the design's intensity", d["psd_scale"]),
                ("runs x duration (s)", f"{self.runs} x {self.duration_s:g}"),
                ("crossings counted", self.crossings),
                ("nonlinear crossing rate (1/s)", d["monte_carlo_rate_per_s"]),
                ("linear Rice crossing rate (1/s)", d["rice_rate_per_s"]),
                ("ratio nonlinear / linear", d["ratio"]),
                ("standard error of the ratio", d["standard_error_ratio"])]
        return table(["figure", "value"], rows,
                     "Saturation crossings: nonlinear Monte-Carlo against linear Rice")


def _quat_deriv(q, w):
    """``q' = q (x) (0, w) / 2`` for batches (..., 4), (..., 3)."""
    qw, qx, qy, qz = q[..., 0], q[..., 1], q[..., 2], q[..., 3]
    p, r_, s = w[..., 0], w[..., 1], w[..., 2]
    return 0.5 * np.stack([-qx * p - qy * r_ - qz * s, qw * p + qy * s - qz * r_,
                           qw * r_ - qx * s + qz * p, qw * s + qx * r_ - qy * p], axis=-1)


def _up(q):
    q = q / np.linalg.norm(q, axis=-1, keepdims=True)
    w, x, y, z = q[..., 0], q[..., 1], q[..., 2], q[..., 3]
    return np.stack([2 * (x * z - w * y), 2 * (y * z + w * x), 1 - 2 * (x * x + y * y)],
                    axis=-1)


def gust_monte_carlo(veh: Vehicle, eq: Equilibrium, ctl: LinearControl, *, runs: int = 24,
                     duration_s: float = 8.0, step_s: float = 0.004, seed: int = 1,
                     target_rate_per_s: float = TARGET_RATE_PER_S) -> GustMonteCarlo | None:
    """Count saturation crossings of the nonlinear loop under gusts; compare with Rice.

    Parameters
    ----------
    veh : Vehicle
        The vehicle.
    eq : Equilibrium
        Operating point (its failed rotors stay off).
    ctl : LinearControl
        Its LQR (with motor lag when the design has it).
    runs : int
        Independent runs, integrated together.
    duration_s : float
        Counted length of each run after a burn-in of five slowest time constants, in s.
    step_s : float
        RK4 step (the disturbance is held over it), in s.
    seed : int
        Seed of :func:`numpy.random.default_rng`.
    target_rate_per_s : float
        Linear crossing rate the gust intensity is scaled to, in 1/s.

    Returns
    -------
    GustMonteCarlo or None
        None without a stabilising loop.
    """
    c = veh.design.control
    if ctl.K is None or not eq.found:
        return None
    fmin_all = np.array([r.min_thrust_n for r in veh.design.rotors])
    psd0, tau_f = c.disturbance_torque_psd_n2_m2_s, c.disturbance_time_constant_s

    def rate(scale):
        rk = saturation_risk(eq, ctl, psd0 * scale, tau_f, min_thrust_n=fmin_all)
        return rk.crossing_rate_per_s

    lo, hi = 1e-6, 1e12
    if rate(hi) < target_rate_per_s:
        return None
    scale = 1.0 if rate(1.0) >= target_rate_per_s else brentq(
        lambda s: math.log(max(rate(math.exp(s)), 1e-300)) - math.log(target_rate_per_s),
        math.log(max(lo, 1.0)), math.log(hi), xtol=1e-3)
    scale = math.exp(scale) if scale != 1.0 else 1.0
    psd = psd0 * scale
    nu_lin = rate(scale)

    model, par = veh.model, veh.par
    work = eq.working
    k = int(work.sum())
    lagged = ctl.has_motor_lag
    tau_m = ctl.motor_time_constant_s if lagged else None
    K = ctl.K
    fbar_all = np.nan_to_num(eq.thrust_n)
    fbar = fbar_all[work]
    om_bar = np.asarray(eq.omega_bar_rad_s, float)
    n_bar = np.asarray(eq.n_bar, float)
    fmax = eq.max_thrust_n[work]
    fmin = fmin_all[work]
    Jinv = veh.inertia_inv
    rng = np.random.default_rng(seed)
    a = math.exp(-step_s / tau_f)
    sd = math.sqrt(psd / (2 * tau_f) * (1 - a * a))
    slow = float(np.min(-ctl.closed_loop_poles.real))
    burn = 5.0 / slow + 5.0 * tau_f
    n_burn = int(math.ceil(burn / step_s))
    n_steps = int(math.ceil(duration_s / step_s))

    # state: q (4), omega (3), f (k, with lag)
    from kit.analysis.simulate import quat_from_up

    q = np.tile(quat_from_up(n_bar), (runs, 1))
    # heading of the equilibrium does not matter: the reduced state uses n = R^T e_z only
    om = np.tile(om_bar, (runs, 1))
    f = np.tile(fbar, (runs, 1))
    d = rng.standard_normal((runs, 2)) * math.sqrt(psd / (2 * tau_f))

    def thrust_cmd(qq, ww, ff):
        n = _up(qq)
        x = np.concatenate([ww[:, :2] - om_bar[:2], n[:, :2] - n_bar[:2]], axis=1)
        if lagged:
            x = np.concatenate([x, ff - fbar], axis=1)
        return fbar - x @ K.T

    def deriv(qq, ww, ff, dist):
        raw = thrust_cmd(qq, ww, ff)
        cmd = np.clip(raw, fmin, fmax)
        fr = np.clip(ff, fmin, fmax) if lagged else cmd
        full = np.zeros((runs, veh.n))
        full[:, work] = fr
        acc = model.omega_dot(ww, full, par) + dist @ Jinv[:, :2].T
        dq = _quat_deriv(qq, ww)
        df = (raw - ff) / tau_m if lagged else np.zeros_like(ff)
        return dq, acc, df

    crossings = 0
    prev = thrust_cmd(q, om, f)
    for i in range(n_burn + n_steps):
        k1 = deriv(q, om, f, d)
        k2 = deriv(q + 0.5 * step_s * k1[0], om + 0.5 * step_s * k1[1], f + 0.5 * step_s * k1[2],
                   d)
        k3 = deriv(q + 0.5 * step_s * k2[0], om + 0.5 * step_s * k2[1], f + 0.5 * step_s * k2[2],
                   d)
        k4 = deriv(q + step_s * k3[0], om + step_s * k3[1], f + step_s * k3[2], d)
        q = q + step_s / 6 * (k1[0] + 2 * k2[0] + 2 * k3[0] + k4[0])
        om = om + step_s / 6 * (k1[1] + 2 * k2[1] + 2 * k3[1] + k4[1])
        f = f + step_s / 6 * (k1[2] + 2 * k2[2] + 2 * k3[2] + k4[2])
        q /= np.linalg.norm(q, axis=1, keepdims=True)
        d = a * d + sd * rng.standard_normal((runs, 2))
        cur = thrust_cmd(q, om, f) if not lagged else f.copy()
        if i >= n_burn:
            crossings += int(np.sum((prev <= fmax) & (cur > fmax)))
            crossings += int(np.sum((prev >= fmin) & (cur < fmin)))
        prev = cur
    total = runs * n_steps * step_s
    nu_mc = crossings / total
    ratio = nu_mc / nu_lin if nu_lin > 0 else math.nan
    se = ratio / math.sqrt(crossings) if crossings > 0 else math.nan
    del k
    return GustMonteCarlo(eq.label, scale, psd, runs, n_steps * step_s, step_s, seed, crossings,
                          nu_mc, nu_lin, ratio, se)

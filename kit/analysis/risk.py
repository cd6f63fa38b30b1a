r"""Saturation risk: the chance per second that a rotor's thrust leaves [0, f_max] under gusts.

Disturbance torques about x_B and y_B are first-order filtered white noise,
``tau_f d_dot = -d + w`` with ``E[w(t) w(t+s)^T] = S I delta(s)`` (``S`` the design's
``disturbance_torque_psd_n2_m2_s``), appended to the closed loop ``x_dot = (A - B K) x + B_d d``.
The stationary covariance ``Sigma`` solves the Lyapunov equation

.. math::

    F \Sigma + \Sigma F^{\mathsf T} + G S G^{\mathsf T} = 0, \qquad
    F = \begin{bmatrix} A - BK & B_d \\ 0 & -I/\tau_f \end{bmatrix}, \quad
    G = \begin{bmatrix} 0 \\ I/\tau_f \end{bmatrix}.

Rotor ``i``'s thrust deviation ``u_i = -K_i x`` (with motor lag: the thrust state ``f_i``, whose
rate is ``(c_i - f_i) / tau_i``) has variance ``sigma_i^2`` and its rate
``u_i_dot = -K_i (A_cl x + B_d d)`` a finite variance ``sigma_dot_i^2`` (with unfiltered white
noise it would not). Rice's formula gives the mean rate of crossings of a level ``a`` by a
stationary Gaussian process,

.. math::

    \nu(a) = \frac{1}{2\pi} \frac{\sigma_{\dot u}}{\sigma_u} e^{-a^2 / 2\sigma_u^2},

summed over the upper margin ``f_max - f_bar`` and the lower margin ``f_bar - f_min`` (idle
thrust ``min_thrust_n``) of every working rotor (a union bound), and ``p = 1 - exp(-nu T)``
for ``T = 1 s`` (crossings as a Poisson stream, good when they are rare).

References
----------
S. O. Rice, "Mathematical analysis of random noise", Bell System Technical Journal 24 (1945),
sec. 3.3 (from memory). Papoulis & Pillai, Probability, Random Variables and Stochastic
Processes, 4th ed., sec. 9-4 (level crossings; from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla

from kit.analysis.control import LinearControl
from kit.analysis.equilibrium import Equilibrium

#: Exposure time of the probability, s.
EXPOSURE_S = 1.0


@dataclass(frozen=True, repr=False)
class SaturationRisk:
    """Thrust-deviation statistics per working rotor and the probability of saturation."""

    inputs: tuple[str, ...]
    thrust_std_n: np.ndarray
    thrust_rate_std_n_s: np.ndarray
    upper_margin_n: np.ndarray
    lower_margin_n: np.ndarray
    crossing_rate_per_s: float
    probability_per_s: float
    psd_n2_m2_s: float
    time_constant_s: float

    def __repr__(self) -> str:
        return f"<SaturationRisk: P = {self.probability_per_s:.3g} per s>"

    def to_dict(self) -> dict:
        return {
            "inputs": list(self.inputs),
            "thrust_std_n": self.thrust_std_n.tolist(),
            "thrust_rate_std_n_s": self.thrust_rate_std_n_s.tolist(),
            "upper_margin_n": self.upper_margin_n.tolist(),
            "lower_margin_n": self.lower_margin_n.tolist(),
            "crossing_rate_per_s": float(self.crossing_rate_per_s),
            "probability_per_s": float(self.probability_per_s),
            "psd_n2_m2_s": float(self.psd_n2_m2_s),
            "time_constant_s": float(self.time_constant_s),
        }

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import risk_html

        return risk_html(self)


def rice_rate(sigma: float, sigma_dot: float, level: float) -> float:
    """Mean up-crossing rate of ``level`` by a zero-mean stationary Gaussian process, 1/s."""
    if sigma <= 0:
        return 0.0
    return sigma_dot / (2 * math.pi * sigma) * math.exp(-0.5 * (level / sigma) ** 2)


def closed_loop_with_filter(ctl: LinearControl, tau_s: float):
    """Augmented closed loop (F, G) with the disturbance filter states, and the rate map."""
    Acl = ctl.A - ctl.B @ ctl.K
    n = Acl.shape[0]
    F = np.block([[Acl, ctl.Bd], [np.zeros((2, n)), -np.eye(2) / tau_s]])
    G = np.vstack([np.zeros((n, 2)), np.eye(2) / tau_s])
    return F, G


def saturation_risk(eq: Equilibrium, ctl: LinearControl, psd: float, tau_s: float,
                    exposure_s: float = EXPOSURE_S,
                    min_thrust_n: np.ndarray | None = None) -> SaturationRisk | None:
    """Saturation risk at an equilibrium under its LQR (None when there is no stable loop).

    Parameters
    ----------
    psd : float
        Disturbance-torque intensity S, in N^2 m^2 s (two-sided, each axis).
    tau_s : float
        Filter time constant, in s.
    exposure_s : float
        Exposure time of the probability, in s.
    min_thrust_n : ndarray (N,) or None
        Idle thrust of every rotor, in N (None: 0).
    """
    if ctl.K is None or not eq.found:
        return None
    F, G = closed_loop_with_filter(ctl, tau_s)
    Sigma = sla.solve_continuous_lyapunov(F, -psd * G @ G.T)
    n = ctl.A.shape[0]
    Cx = ctl.thrust_output
    Cu = np.hstack([Cx, np.zeros((Cx.shape[0], 2))])
    Cdot = Cx @ F[:n, :]
    var_u = np.einsum("ij,jk,ik->i", Cu, Sigma, Cu)
    var_du = np.einsum("ij,jk,ik->i", Cdot, Sigma, Cdot)
    sig = np.sqrt(np.maximum(var_u, 0.0))
    sig_dot = np.sqrt(np.maximum(var_du, 0.0))
    fbar = eq.thrust_n[eq.working]
    up = eq.max_thrust_n[eq.working] - fbar
    fmin = np.zeros(eq.working.size) if min_thrust_n is None else np.asarray(min_thrust_n, float)
    lo = fbar - fmin[eq.working]
    nu = 0.0
    for s, sd, a, b in zip(sig, sig_dot, up, lo, strict=True):
        nu += rice_rate(s, sd, a) + rice_rate(s, sd, b)
    return SaturationRisk(
        inputs=ctl.inputs, thrust_std_n=sig, thrust_rate_std_n_s=sig_dot, upper_margin_n=up,
        lower_margin_n=lo, crossing_rate_per_s=nu, probability_per_s=1 - math.exp(-nu * exposure_s),
        psd_n2_m2_s=psd, time_constant_s=tau_s,
    )

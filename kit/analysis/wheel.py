r"""Momentum-wheel study: H2 disturbance sensitivity against wheel momentum, and wheel sizing.

For each signed wheel momentum ``h`` (along +z_B) the equilibrium is recomputed (the wheel's
gyroscopic moment ``-omega x h e_z`` changes it when the vehicle spins), the LQR is redesigned
with the design's weights, and the H2 norm from torques about x_B, y_B to ``(n_x, n_y)``
(:func:`kit.analysis.control.h2_norm`) is divided by its value at ``h = 0``. The same ratio with
the ``h = 0`` gain kept fixed is reported beside it. Points where the reduced model comes close
to uncontrollable (relative PBH distance below ``DEGENERACY_TOL``), or where that distance dips
locally below ``DIP_FRACTION`` of its ``h = 0`` value, are flagged: there the wheel crosses (or
passes near) a controllability degeneracy and the H2 norm spikes.

.. math::

    \rho(h) = \frac{\|G_h\|_2}{\|G_0\|_2}, \qquad
    \|G_h\|_2^2 = \operatorname{tr}(C W_h C^{\mathsf T}), \quad
    A_{cl}(h) W_h + W_h A_{cl}(h)^{\mathsf T} + B_d B_d^{\mathsf T} = 0 .

Sizing at the chosen momentum ``h``: wheel speed ``h / I_w``, stored energy
``E = I_w w^2 / 2 = h^2 / (2 I_w)``, and the gyroscopic torque ``|omega x h e_z| <= h |omega|``
at the largest body rate of the study (the largest equilibrium spin rate). With motor lag in the
design the reduced model with motor lag (:func:`kit.analysis.control.augmented_model`) is used.

References
----------
Zhou, Doyle & Glover, Robust and Optimal Control, 1996, sec. 4.4 (H2 norm; from memory).
Hughes, Spacecraft Attitude Dynamics, 1986, ch. 6 (gyrostats, momentum wheels; from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kit.analysis import control as ctl_mod
from kit.analysis import equilibrium as eq_mod
from kit.analysis.vehicle import Vehicle

#: Relative PBH distance below which a point is flagged near-uncontrollable.
DEGENERACY_TOL = 1e-3
#: A local dip of the PBH distance below this fraction of its h = 0 value is flagged.
DIP_FRACTION = 0.3


@dataclass(frozen=True, repr=False)
class WheelCurve:
    """H2 ratio against h for one case."""

    failed: tuple[str, ...]
    thrust_ratio: dict | None
    h_n_m_s: np.ndarray
    h2: np.ndarray
    h2_ratio: np.ndarray
    h2_ratio_fixed_gain: np.ndarray
    spin_rate_rad_s: np.ndarray
    controllability_distance: np.ndarray
    flags: tuple[str, ...]

    def __repr__(self) -> str:
        return f"<WheelCurve {self.label}: {len(self.h_n_m_s)} points, {len(self.flags)} flag(s)>"

    @property
    def label(self) -> str:
        return "no failure" if not self.failed else "failed: " + ", ".join(self.failed)

    def to_dict(self) -> dict:
        def clean(a):
            return [None if not math.isfinite(x) else float(x) for x in a]

        return {
            "failed": list(self.failed),
            "thrust_ratio": self.thrust_ratio,
            "h_n_m_s": clean(self.h_n_m_s),
            "h2": clean(self.h2),
            "h2_ratio": clean(self.h2_ratio),
            "h2_ratio_fixed_gain": clean(self.h2_ratio_fixed_gain),
            "spin_rate_rad_s": clean(self.spin_rate_rad_s),
            "controllability_distance": clean(self.controllability_distance),
            "flags": list(self.flags),
        }


@dataclass(frozen=True, repr=False)
class WheelStudy:
    """The wheel study of a design: curves per case and the sizing figures."""

    available: bool
    reason: str
    h_max_n_m_s: float
    chosen_h_n_m_s: float
    wheel_speed_rad_s: float
    stored_energy_j: float
    max_body_rate_rad_s: float
    gyro_torque_n_m: float
    curves: tuple[WheelCurve, ...]

    def __repr__(self) -> str:
        if not self.available:
            return "<WheelStudy: none>"
        return (f"<WheelStudy: h_max {self.h_max_n_m_s:.4g} N m s, {len(self.curves)} case(s), "
                f"{len(self.flags)} flag(s)>")

    @property
    def flags(self) -> list[str]:
        return [f"{c.label}: {f}" for c in self.curves for f in c.flags]

    def curve(self, failed=()) -> WheelCurve | None:
        for c in self.curves:
            if set(c.failed) == set(failed):
                return c
        return None

    def to_dict(self) -> dict:
        nominal = self.curves[0] if self.curves else None
        return {
            "available": self.available,
            "reason": self.reason,
            "h_max_n_m_s": self.h_max_n_m_s,
            "chosen_h_n_m_s": self.chosen_h_n_m_s,
            "wheel_speed_rad_s": self.wheel_speed_rad_s,
            "stored_energy_j": self.stored_energy_j,
            "max_body_rate_rad_s": self.max_body_rate_rad_s,
            "gyro_torque_n_m": self.gyro_torque_n_m,
            "h_n_m_s": nominal.to_dict()["h_n_m_s"] if nominal else [],
            "h2_ratio": nominal.to_dict()["h2_ratio"] if nominal else [],
            "flags": self.flags,
            "curves": [c.to_dict() for c in self.curves],
        }

    def _repr_html_(self) -> str:
        from kit.analysis.htmltable import wheel_html

        return wheel_html(self)


def momentum_grid(h_max: float, per_side: int = 10, decades: float = 2.0) -> np.ndarray:
    """Signed momenta: 0 and +-h_max * logspace(-decades, 0, per_side), ascending, in N m s."""
    mags = h_max * np.logspace(-decades, 0.0, per_side)
    return np.concatenate([-mags[::-1], [0.0], mags])


def _h2_fixed(veh_h: Vehicle, eq, K0) -> float:
    if K0 is None or not eq.found:
        return math.nan
    A, B, Bd = ctl_mod.augmented_model(veh_h, eq)
    if B.shape[1] != K0.shape[0] or K0.shape[1] != A.shape[0] or not np.all(np.isfinite(A)):
        return math.nan
    C = np.zeros((2, A.shape[0]))
    C[0, 2] = C[1, 3] = 1.0
    return ctl_mod.h2_norm(A - B @ K0, Bd, C)


def wheel_curve(veh: Vehicle, failed=(), thrust_ratio=None, h_grid=None) -> WheelCurve:
    """H2 ratio against wheel momentum for one failure case (LQR redesigned per h)."""
    h_grid = momentum_grid(veh.design.wheel.max_momentum_n_m_s) if h_grid is None else h_grid
    n = len(h_grid)
    h2 = np.full(n, np.nan)
    h2_fixed = np.full(n, np.nan)
    spin = np.full(n, np.nan)
    dist = np.full(n, np.nan)
    # solve outward from h = 0 so each point warm-starts from its neighbour
    i0 = int(np.argmin(np.abs(h_grid)))
    base = veh.with_wheel_momentum(h_grid[i0])
    # only the chosen point enters the curve: no spinning candidates where the rule has
    # already chosen the static hover (``complete=False``, the same point)
    eq0 = eq_mod.solve(base, failed, thrust_ratio, complete=False)
    c0 = ctl_mod.design_control(base, eq0, with_robustness=False)
    K0 = c0.K
    results = {i0: (eq0, c0)}
    for order in (range(i0 + 1, n), range(i0 - 1, -1, -1)):
        prev = eq0
        for i in order:
            vh = veh.with_wheel_momentum(h_grid[i])
            hint = (prev.spin_rate_rad_s, prev.n_bar) if prev.found else None
            eq = eq_mod.solve(vh, failed, thrust_ratio, hint=hint, complete=False)
            results[i] = (eq, ctl_mod.design_control(vh, eq, with_robustness=False))
            prev = eq if eq.found else prev
    for i, (eq, c) in results.items():
        h2[i] = c.h2_norm
        spin[i] = eq.spin_rate_rad_s if eq.found else np.nan
        dist[i] = c.controllability_distance if eq.found else np.nan
        h2_fixed[i] = _h2_fixed(veh.with_wheel_momentum(h_grid[i]), eq, K0)
    ref = h2[i0]
    ratio = h2 / ref if math.isfinite(ref) and ref > 0 else np.full(n, np.nan)
    ratio_fixed = h2_fixed / ref if math.isfinite(ref) and ref > 0 else np.full(n, np.nan)
    flags = []
    for i in range(n):
        h = h_grid[i]
        if not math.isfinite(spin[i]):
            flags.append(f"h = {h:+.3g} N m s: no equilibrium")
        elif dist[i] < DEGENERACY_TOL:
            flags.append(f"h = {h:+.3g} N m s: near-uncontrollable (controllability distance "
                         f"{dist[i]:.1e})")
        elif (0 < i < n - 1 and np.all(np.isfinite(dist[i - 1:i + 2]))
              and dist[i] < min(dist[i - 1], dist[i + 1])
              and dist[i] < DIP_FRACTION * dist[i0]):
            flags.append(f"h = {h:+.3g} N m s: passes close to a controllability degeneracy "
                         f"(controllability distance {dist[i]:.1e}, "
                         f"{dist[i] / dist[i0]:.0%} of h = 0); "
                         f"H2 ratio {ratio[i]:.3g}")
    return WheelCurve(tuple(failed), thrust_ratio, np.asarray(h_grid, float), h2, ratio,
                      ratio_fixed, spin, dist, tuple(flags))


def wheel_study(veh: Vehicle, cases=None, chosen_h_n_m_s: float | None = None,
                h_grid=None, executor=None) -> WheelStudy:
    """The wheel study for the nominal and every failure case of a design with a wheel.

    Parameters
    ----------
    cases : list of (failed, thrust_ratio) or None
        Default: :func:`kit.analysis.equilibrium.all_cases`.
    chosen_h_n_m_s : float or None
        Momentum for the sizing figures, N m s (default: the wheel's h_max).
    executor : concurrent.futures.Executor or None
        Runs the cases in parallel when given.
    """
    w = veh.design.wheel
    if w is None:
        return WheelStudy(False, "the design has no [wheel]: no wheel study (add a [wheel] table "
                          "to size one)", 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, ())
    cases = eq_mod.all_cases(veh) if cases is None else cases
    if executor is None:
        curves = tuple(wheel_curve(veh, f, r, h_grid) for f, r in cases)
    else:
        futs = [executor.submit(wheel_curve, veh, f, r, h_grid) for f, r in cases]
        curves = tuple(fu.result() for fu in futs)
    h = w.max_momentum_n_m_s if chosen_h_n_m_s is None else float(chosen_h_n_m_s)
    rates = [abs(x) for c in curves for x in c.spin_rate_rad_s if math.isfinite(x)]
    rate = max(rates) if rates else 0.0
    return WheelStudy(
        available=True, reason="", h_max_n_m_s=w.max_momentum_n_m_s, chosen_h_n_m_s=h,
        wheel_speed_rad_s=abs(h) / w.inertia_kg_m2, stored_energy_j=h * h / (2 * w.inertia_kg_m2),
        max_body_rate_rad_s=rate, gyro_torque_n_m=abs(h) * rate, curves=curves,
    )

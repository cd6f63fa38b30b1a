r"""Principal-axis spin stability of the rigid body, and where the relaxed-hover spin axis lies.

Torque-free rotation of a rigid body (rotors stopped, no drag) obeys Euler's equation
``J omega_dot = -omega x J omega``. Linearised about a steady spin ``omega_bar = Omega a_k``
about a principal axis ``a_k``,

.. math::

    \delta\dot{\boldsymbol\omega} = \mathbf J^{-1}\big( [\mathbf J \bar{\boldsymbol\omega}]_\times
    - [\bar{\boldsymbol\omega}]_\times \mathbf J \big)\, \delta\boldsymbol\omega ,
    \qquad
    \lambda^2 = -\Omega^2 \frac{(I_k - I_i)(I_k - I_j)}{I_i I_j},

so spin about the minor and the major axis is neutrally stable (``lambda`` imaginary: nutation)
and spin about the intermediate axis grows at ``Omega sqrt((I_2 - I_1)(I_3 - I_2) / (I_1 I_3))``
(moments ascending, ``I_1 <= I_2 <= I_3``). The growth rates here are the largest real parts of
the eigenvalues of the linearised matrix; the closed form is reported beside them as a check.

A spinning relaxed-hover equilibrium turns about world up, ``n_bar`` in body axes. When
``n_bar`` lies near the intermediate principal axis, the torque-free part of the motion is the
unstable one, and the controller has to supply the stabilisation; :func:`spin_axis_alignment`
measures the angle between ``n_bar`` and each principal axis and flags that case.

References
----------
L. D. Landau and E. M. Lifshitz, Mechanics, 3rd ed., Pergamon 1976, sec. 37 (Euler's equations;
problem on the stability of rotation about the principal axes; from memory). H. Goldstein,
C. Poole, J. Safko, Classical Mechanics, 3rd ed., sec. 5.6 (from memory).
"""

from __future__ import annotations

import html
import math
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

from kit.analysis.equilibrium import Equilibrium
from kit.analysis.vehicle import Vehicle

#: Names of the principal axes in ascending order of their moments.
AXIS_NAMES = ("minor", "intermediate", "major")
#: Default angle from the intermediate axis below which a spin axis is flagged, in degrees.
INTERMEDIATE_AXIS_FLAG_DEG = 20.0
#: Spin rates below this count as not spinning, in rad/s.
MIN_SPIN_RAD_S = 1e-3


def _skew(a: np.ndarray) -> np.ndarray:
    """Cross-product matrix, ``_skew(a) @ b == a x b``."""
    return np.array([[0.0, -a[2], a[1]], [a[2], 0.0, -a[0]], [-a[1], a[0], 0.0]])


def euler_jacobian(inertia_kg_m2: np.ndarray, omega_rad_s: np.ndarray) -> np.ndarray:
    """Jacobian of the torque-free Euler equation ``omega_dot = -J^-1 (omega x J omega)``.

    Parameters
    ----------
    inertia_kg_m2 : ndarray (3, 3)
        Inertia tensor about the centre of mass, in kg m^2.
    omega_rad_s : ndarray (3,)
        Angular velocity linearised about, in rad/s.

    Returns
    -------
    ndarray (3, 3)
        ``d omega_dot / d omega``, in 1/s.
    """
    J = np.asarray(inertia_kg_m2, float)
    w = np.asarray(omega_rad_s, float)
    return np.linalg.solve(J, _skew(J @ w) - _skew(w) @ J)


def closed_form_growth_rate(moments_kg_m2, axis: int, spin_rate_rad_s: float) -> float:
    """``|Omega| sqrt(max(0, -(I_k - I_i)(I_k - I_j) / (I_i I_j)))``, in 1/s.

    Parameters
    ----------
    moments_kg_m2 : sequence of 3 floats
        Principal moments, in kg m^2.
    axis : int
        Index ``k`` of the spin axis in ``moments_kg_m2``.
    spin_rate_rad_s : float
        Spin rate Omega, in rad/s.
    """
    m = [float(v) for v in moments_kg_m2]
    i, j = [a for a in range(3) if a != axis]
    lam2 = -spin_rate_rad_s**2 * (m[axis] - m[i]) * (m[axis] - m[j]) / (m[i] * m[j])
    return math.sqrt(max(0.0, lam2))


def _html_table(caption: str, header: list[str], rows: list[list[object]]) -> str:
    def cell(v: object) -> str:
        if isinstance(v, float):
            return html.escape(f"{v:.4g}")
        return html.escape(str(v))

    head = "".join(f"<th>{html.escape(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{cell(v)}</td>" for v in r) + "</tr>" for r in rows)
    return (f"<table><caption>{html.escape(caption)}</caption><thead><tr>{head}</tr></thead>"
            f"<tbody>{body}</tbody></table>")


@dataclass(frozen=True)
class SpinStability:
    """Growth rates of torque-free spin about each principal axis.

    Attributes
    ----------
    spin_rates_rad_s : ndarray (M,)
        Spin rates studied, in rad/s.
    principal_moments_kg_m2 : ndarray (3,)
        Ascending principal moments, in kg m^2.
    principal_axes : ndarray (3, 3)
        Columns are the principal axes in body coordinates (minor, intermediate, major).
    growth_rate_1_s : ndarray (3, M)
        Largest real part of the eigenvalues of the linearised Euler equation, in 1/s
        (0 where neutral); row ``k`` is the spin about axis ``k``.
    closed_form_growth_rate_1_s : ndarray (3, M)
        The closed form of the module docstring, in 1/s.
    nutation_rate_rad_s : ndarray (3, M)
        Largest imaginary part of those eigenvalues, in rad/s.
    """

    spin_rates_rad_s: np.ndarray
    principal_moments_kg_m2: np.ndarray
    principal_axes: np.ndarray
    growth_rate_1_s: np.ndarray
    closed_form_growth_rate_1_s: np.ndarray
    nutation_rate_rad_s: np.ndarray

    @property
    def unstable_axes(self) -> tuple[str, ...]:
        """Names of the axes whose spin grows at some studied rate."""
        return tuple(AXIS_NAMES[k] for k in range(3) if np.any(self.growth_rate_1_s[k] > 0))

    def rows(self) -> list[dict]:
        """One dict per principal axis (the ``axes`` entries of :meth:`to_dict`)."""
        out = []
        for k in range(3):
            out.append({
                "axis": AXIS_NAMES[k],
                "moment_kg_m2": float(self.principal_moments_kg_m2[k]),
                "direction": [float(v) for v in self.principal_axes[:, k]],
                "growth_rate_1_s": [float(v) for v in self.growth_rate_1_s[k]],
                "closed_form_growth_rate_1_s": [float(v) for v in
                                                self.closed_form_growth_rate_1_s[k]],
                "nutation_rate_rad_s": [float(v) for v in self.nutation_rate_rad_s[k]],
                "stable": bool(np.all(self.growth_rate_1_s[k] <= 0)),
            })
        return out

    def to_dict(self) -> dict:
        return {
            "spin_rates_rad_s": [float(v) for v in self.spin_rates_rad_s],
            "axes": self.rows(),
        }

    def _repr_html_(self) -> str:
        rates = self.spin_rates_rad_s
        big = int(np.argmax(np.abs(rates))) if rates.size else None
        header = ["axis", "moment (kg m^2)", "direction (body)",
                  "growth rate (1/s)" + (f" at {rates[big]:.4g} rad/s" if big is not None else ""),
                  "stable"]
        rows = []
        for r in self.rows():
            g = r["growth_rate_1_s"][big] if big is not None else math.nan
            rows.append([r["axis"], r["moment_kg_m2"],
                         "(" + ", ".join(f"{v:.3f}" for v in r["direction"]) + ")", g,
                         "yes" if r["stable"] else "no"])
        return _html_table("Torque-free spin about the principal axes", header, rows)


def principal_spin_stability(veh: Vehicle, spin_rates) -> SpinStability:
    """Growth rates of torque-free spin about each principal axis at the given spin rates.

    Parameters
    ----------
    veh : Vehicle
        Its inertia ``veh.mp.inertia_kg_m2`` (rotor spin inertia included, rotors stopped).
    spin_rates : float or array_like
        Spin rates Omega, in rad/s.

    Returns
    -------
    SpinStability
        Growth rates from the eigenvalues of :func:`euler_jacobian`, real parts below
        ``1e-9 |Omega|`` set to 0 (round-off of a neutral pair), and the closed form.
    """
    rates = np.atleast_1d(np.asarray(spin_rates, float))
    J = veh.mp.inertia_kg_m2
    moments = np.asarray(veh.mp.principal_moments_kg_m2, float)
    axes = np.asarray(veh.mp.principal_axes, float)
    growth = np.zeros((3, rates.size))
    nut = np.zeros((3, rates.size))
    closed = np.zeros((3, rates.size))
    for k in range(3):
        for m, w in enumerate(rates):
            lam = np.linalg.eigvals(euler_jacobian(J, w * axes[:, k]))
            g = float(np.max(lam.real))
            growth[k, m] = g if g > 1e-9 * abs(w) else 0.0
            nut[k, m] = float(np.max(np.abs(lam.imag)))
            closed[k, m] = closed_form_growth_rate(moments, k, w)
    return SpinStability(rates, moments, axes, growth, closed, nut)


@dataclass(frozen=True)
class SpinAxisAlignment:
    """Angles between spinning equilibria's spin axes and the principal axes.

    Attributes
    ----------
    labels : tuple of str
        One per spinning equilibrium (``Equilibrium.label``).
    spin_rates_rad_s : ndarray (E,)
        Signed spin rates, in rad/s.
    n_bar : ndarray (E, 3)
        Spin axes (world up in body axes).
    angles_deg : ndarray (E, 3)
        Acute angle between ``n_bar`` and the minor, intermediate and major axis, in degrees.
    flagged : ndarray (E,) of bool
        Spin axis within ``threshold_deg`` of the intermediate axis.
    threshold_deg : float
        The flag threshold, in degrees.
    skipped : tuple of str
        Labels of the equilibria given that were not found or do not spin.
    """

    labels: tuple[str, ...]
    spin_rates_rad_s: np.ndarray
    n_bar: np.ndarray
    angles_deg: np.ndarray
    flagged: np.ndarray
    threshold_deg: float
    skipped: tuple[str, ...] = ()

    @property
    def any_flagged(self) -> bool:
        return bool(np.any(self.flagged))

    def rows(self) -> list[dict]:
        out = []
        for e, label in enumerate(self.labels):
            ang = self.angles_deg[e]
            out.append({
                "case": label,
                "spin_rate_rad_s": float(self.spin_rates_rad_s[e]),
                "n_bar": [float(v) for v in self.n_bar[e]],
                "angle_to_axis_deg": {AXIS_NAMES[k]: float(ang[k]) for k in range(3)},
                "nearest_axis": AXIS_NAMES[int(np.argmin(ang))],
                "near_intermediate_axis": bool(self.flagged[e]),
            })
        return out

    def to_dict(self) -> dict:
        return {"threshold_deg": float(self.threshold_deg), "equilibria": self.rows(),
                "skipped": list(self.skipped)}

    def _repr_html_(self) -> str:
        header = ["case", "spin rate (rad/s)", "to minor (deg)", "to intermediate (deg)",
                  "to major (deg)", f"within {self.threshold_deg:g} deg of intermediate"]
        rows = [[r["case"], r["spin_rate_rad_s"], *r["angle_to_axis_deg"].values(),
                 "FLAG" if r["near_intermediate_axis"] else "no"] for r in self.rows()]
        return _html_table("Spin axis against the principal axes", header, rows)


def spin_axis_alignment(veh: Vehicle, eq: Equilibrium | Iterable[Equilibrium],
                        threshold_deg: float = INTERMEDIATE_AXIS_FLAG_DEG) -> SpinAxisAlignment:
    """Angle between each spinning equilibrium's spin axis and the principal axes.

    Parameters
    ----------
    veh : Vehicle
        Supplies ``veh.mp.principal_axes`` (columns, ascending moments).
    eq : Equilibrium or iterable of Equilibrium
        Equilibria of this vehicle; those not found or spinning slower than
        :data:`MIN_SPIN_RAD_S` are listed in ``skipped``.
    threshold_deg : float
        Flag a spin axis within this angle of the intermediate axis, in degrees.

    Returns
    -------
    SpinAxisAlignment
    """
    eqs = [eq] if isinstance(eq, Equilibrium) else list(eq)
    axes = np.asarray(veh.mp.principal_axes, float)
    labels, rates, nbar, angles, skipped = [], [], [], [], []
    for e in eqs:
        if not e.found or not abs(e.spin_rate_rad_s) >= MIN_SPIN_RAD_S:
            skipped.append(e.label)
            continue
        n = np.asarray(e.n_bar, float) / np.linalg.norm(e.n_bar)
        cos = np.clip(np.abs(axes.T @ n), 0.0, 1.0)
        labels.append(e.label)
        rates.append(float(e.spin_rate_rad_s))
        nbar.append(n)
        angles.append(np.degrees(np.arccos(cos)))
    angles_arr = np.array(angles, float).reshape(-1, 3)
    return SpinAxisAlignment(
        labels=tuple(labels), spin_rates_rad_s=np.array(rates, float),
        n_bar=np.array(nbar, float).reshape(-1, 3), angles_deg=angles_arr,
        flagged=angles_arr[:, 1] < threshold_deg, threshold_deg=float(threshold_deg),
        skipped=tuple(skipped),
    )

"""Measured rotor data: read a thrust-stand CSV and fit the rotor coefficients by least squares.

The two coefficients of a design's rotor are fitted through the origin, each by ordinary least
squares on one regressor:

.. math::

    T_i = k_f\\,\\omega_i^2 + e_i, \\qquad
    \\hat k_f = \\frac{\\sum \\omega_i^2 T_i}{\\sum \\omega_i^4}, \\qquad
    \\mathrm{se}(\\hat k_f) = \\sqrt{\\frac{\\sum e_i^2 / (n - 1)}{\\sum \\omega_i^4}}

    Q_i = \\kappa\\,T_i + e'_i, \\qquad
    \\hat\\kappa = \\frac{\\sum T_i Q_i}{\\sum T_i^2}

with :math:`T` thrust in N, :math:`Q` torque in N m, :math:`\\omega` rotor speed in rad/s,
:math:`k_f` = ``thrust_coeff_n_s2`` and :math:`\\kappa` = ``torque_per_thrust_m``. The torque
fit takes the measured thrust as exact (an errors-in-variables fit is not made).

The stand file is data only: UTF-8 text, at most :data:`MAX_STAND_BYTES`, ``#`` comment lines,
one header line naming the columns (:data:`REQUIRED_COLUMNS`, optional
:data:`OPTIONAL_COLUMNS`, any order), then one row of numbers per operating point.

References
----------
Montgomery, D. C., Peck, E. A., Vining, G. G., *Introduction to Linear Regression Analysis*,
5th ed., Wiley, 2012, section 2.10 (regression through the origin) (from memory).
"""

from __future__ import annotations

import csv
import hashlib
import html
import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

#: Largest stand file accepted, bytes.
MAX_STAND_BYTES = 256 * 1024
REQUIRED_COLUMNS = ("speed_rad_s", "thrust_n", "torque_n_m")
OPTIONAL_COLUMNS = ("voltage_v", "current_a")
#: A fit is "poor" below this coefficient of determination or above this relative standard
#: error (common practice, no source).
MIN_R_SQUARED = 0.98
MAX_RELATIVE_SE = 0.05


#: Range of each column's values, (smallest, largest, unit): far outside any rotor that flies
#: (10 rad/s is about 95 rpm; 1e5 N is ten tonnes of thrust) and keeping the fit's sums of
#: fourth powers inside the float range (common practice, no source).
COLUMN_RANGES: dict[str, tuple[float, float, str]] = {
    "speed_rad_s": (1.0, 1e5, "rad/s"),
    "thrust_n": (1e-6, 1e5, "N"),
    "torque_n_m": (0.0, 1e4, "N m"),
    "voltage_v": (0.0, 1e4, "V"),
    "current_a": (-1e4, 1e4, "A"),
}
#: Column names in other units, and how to convert them (common practice, no source).
_UNIT_HINTS = {
    "rpm": "speed in rad/s as speed_rad_s (rpm x 2 pi / 60 = rpm x 0.10472)",
    "thrust_g": "thrust in N as thrust_n (grams x 0.00980665)",
    "thrust_kgf": "thrust in N as thrust_n (kgf x 9.80665)",
    "gf": "thrust in N as thrust_n (gram-force x 0.00980665)",
    "n_cm": "torque in N m as torque_n_m (N cm x 0.01)",
    "n_mm": "torque in N m as torque_n_m (N mm x 0.001)",
    "oz": "SI units: thrust_n in N, torque_n_m in N m",
    "lb": "SI units: thrust_n in N, torque_n_m in N m",
}


class StandDataError(ValueError):
    """A stand file cannot be read as stand data; the message says what is wrong and the fix."""


@dataclass(frozen=True)
class StandData:
    """Measured operating points of one rotor on a thrust stand (SI)."""

    file: str
    sha256: str
    speed_rad_s: np.ndarray
    thrust_n: np.ndarray
    torque_n_m: np.ndarray
    voltage_v: np.ndarray | None = None
    current_a: np.ndarray | None = None


@dataclass(frozen=True)
class RotorFit:
    """Fitted rotor coefficients with their standard errors, residuals and fit quality."""

    file: str
    sha256: str
    rotors: tuple[str, ...]
    n_points: int
    thrust_coeff_n_s2: float
    thrust_coeff_se_n_s2: float
    torque_per_thrust_m: float
    torque_per_thrust_se_m: float
    thrust_residuals_n: tuple[float, ...]
    torque_residuals_n_m: tuple[float, ...]
    thrust_r_squared: float
    torque_r_squared: float
    max_measured_thrust_n: float
    speed_rad_s: tuple[float, ...] = ()
    thrust_n: tuple[float, ...] = ()
    torque_n_m: tuple[float, ...] = ()

    @property
    def poor(self) -> list[str]:
        """Reasons the fit is poor (empty for a good fit)."""
        out = []
        for what, r2, rel in (
            ("thrust", self.thrust_r_squared, self.thrust_coeff_se_n_s2 / self.thrust_coeff_n_s2),
            ("torque", self.torque_r_squared,
             self.torque_per_thrust_se_m / self.torque_per_thrust_m),
        ):
            if not r2 >= MIN_R_SQUARED:
                out.append(f"{what} fit R^2 {r2:.3f} < {MIN_R_SQUARED}")
            if not rel <= MAX_RELATIVE_SE:
                out.append(f"{what} coefficient standard error {100 * rel:.1f} % > "
                           f"{100 * MAX_RELATIVE_SE:g} %")
        return out

    def _repr_html_(self) -> str:
        rows = [
            ("stand file", self.file), ("SHA-256", self.sha256),
            ("rotors", ", ".join(self.rotors)), ("operating points", str(self.n_points)),
            ("thrust_coeff_n_s2 (fitted)",
             f"{self.thrust_coeff_n_s2:.5g} &plusmn; {self.thrust_coeff_se_n_s2:.2g}"),
            ("torque_per_thrust_m (fitted)",
             f"{self.torque_per_thrust_m:.5g} &plusmn; {self.torque_per_thrust_se_m:.2g}"),
            ("R^2 thrust, torque", f"{self.thrust_r_squared:.4f}, {self.torque_r_squared:.4f}"),
            ("largest thrust residual (N)",
             f"{max(abs(v) for v in self.thrust_residuals_n):.3g}"),
        ]
        if self.poor:
            rows.append(("fit quality", "POOR: " + "; ".join(self.poor)))
        body = "".join(f"<tr><td>{html.escape(a)}</td><td>{b if '&' in b else html.escape(b)}"
                       "</td></tr>" for a, b in rows)
        return (f"<table><caption>Rotor coefficients fitted by least squares from stand data"
                f"</caption>{body}</table>" + fit_svg(self))

    def to_dict(self) -> dict:
        return {
            "file": self.file, "sha256": self.sha256, "rotors": list(self.rotors),
            "n_points": self.n_points, "fitted": True,
            "thrust_coeff_n_s2": self.thrust_coeff_n_s2,
            "thrust_coeff_se_n_s2": self.thrust_coeff_se_n_s2,
            "torque_per_thrust_m": self.torque_per_thrust_m,
            "torque_per_thrust_se_m": self.torque_per_thrust_se_m,
            "thrust_r_squared": self.thrust_r_squared,
            "torque_r_squared": self.torque_r_squared,
            "thrust_residuals_n": list(self.thrust_residuals_n),
            "torque_residuals_n_m": list(self.torque_residuals_n_m),
            "max_measured_thrust_n": self.max_measured_thrust_n,
        }


def read_stand_text(text: str, file: str = "<text>", sha256: str = "") -> StandData:
    """Parse stand data from CSV text.

    Parameters
    ----------
    text : str
        The CSV text (``#`` comment lines allowed).
    file : str
        Name shown in messages.
    sha256 : str
        Checksum to record.
    """
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise StandDataError(f"{file}: no header line -> a first line naming the columns "
                             + ", ".join(REQUIRED_COLUMNS))
    rows = list(csv.reader(io.StringIO("\n".join(lines))))
    header = [h.strip() for h in rows[0]]
    allowed = REQUIRED_COLUMNS + OPTIONAL_COLUMNS
    for h in header:
        if h not in allowed:
            raise StandDataError(f"{file}: column {h!r} -> " + _column_hint(h, rows[0]))
    if len(set(header)) != len(header):
        twice = next(h for h in header if header.count(h) > 1)
        raise StandDataError(f"{file}: column {twice!r} is named twice -> each column once")
    for h in REQUIRED_COLUMNS:
        if h not in header:
            raise StandDataError(f"{file}: column {h!r} missing -> columns "
                                 + ", ".join(REQUIRED_COLUMNS) + " (SI units)")
    data = []
    for k, row in enumerate(rows[1:], start=2):
        if len(row) != len(header):
            raise StandDataError(f"{file}: data line {k} has {len(row)} values -> "
                                 f"{len(header)}, one per column")
        vals = []
        for h, x in zip(header, row, strict=True):
            try:
                v = float(x)
            except ValueError:
                raise StandDataError(f"{file}: data line {k}, {h}: {x.strip()!r} -> a number "
                                     "(SI units, no unit text)") from None
            lo, hi, unit = COLUMN_RANGES[h]
            if not (math.isfinite(v) and lo <= v <= hi):
                raise StandDataError(f"{file}: data line {k}, {h}: {x.strip()!r} -> a finite "
                                     f"number from {lo:g} to {hi:g} {unit}")
            vals.append(v)
        data.append(vals)
    if len(data) < 3:
        raise StandDataError(f"{file}: {len(data)} data line(s) -> at least 3 operating points")
    arr = np.array(data, float)
    col = {h: arr[:, j] for j, h in enumerate(header)}
    return StandData(file=file, sha256=sha256, speed_rad_s=col["speed_rad_s"],
                     thrust_n=col["thrust_n"], torque_n_m=col["torque_n_m"],
                     voltage_v=col.get("voltage_v"), current_a=col.get("current_a"))


def read_stand_file(path: str | Path, shown: str | None = None) -> StandData:
    """Read a stand file (UTF-8 CSV, at most :data:`MAX_STAND_BYTES`).

    Parameters
    ----------
    path : str or Path
        The CSV file.
    shown : str or None
        Name shown in messages and kept in the fit (default: the path as given).
    """
    p = Path(path)
    shown = shown or str(path)
    if not p.is_file():
        raise StandDataError(f"{shown}: no such file -> a CSV file beside the design file")
    if p.stat().st_size > MAX_STAND_BYTES:
        raise StandDataError(f"{shown}: {p.stat().st_size} bytes -> at most {MAX_STAND_BYTES} "
                             "bytes; a stand file holds data only")
    raw = p.read_bytes()
    try:
        text = raw.decode("utf-8-sig")  # a byte-order mark, as spreadsheets write, is dropped
    except UnicodeDecodeError:
        raise StandDataError(f"{shown}: not UTF-8 text -> save the file as UTF-8 CSV") from None
    if "\x00" in text:
        raise StandDataError(f"{shown}: holds NUL bytes -> a text file (UTF-8 CSV), data only")
    return read_stand_text(text, shown, hashlib.sha256(raw).hexdigest())


def _column_hint(name: str, header: list[str]) -> str:
    """What to write instead of an unknown column name."""
    low = name.lower().replace(" ", "_")
    for key, hint in _UNIT_HINTS.items():
        if key in low:
            return hint
    if len(header) == 1 and (";" in name or "\t" in name):
        return "separate the columns with commas"
    return "one of " + ", ".join(REQUIRED_COLUMNS + OPTIONAL_COLUMNS)


def _through_origin(x: np.ndarray, y: np.ndarray) -> tuple[float, float, np.ndarray, float]:
    """Slope, its standard error, residuals and R^2 (about the mean) of y = b x."""
    b = float(x @ y / (x @ x))
    res = y - b * x
    n = len(x)
    s2 = float(res @ res) / (n - 1)
    se = math.sqrt(s2 / float(x @ x))
    ss_tot = float(((y - y.mean()) ** 2).sum())
    r2 = 1.0 - float(res @ res) / ss_tot if ss_tot > 0 else 1.0
    return b, se, res, r2


def fit(stand: StandData, rotors: tuple[str, ...] = ()) -> RotorFit:
    """Fit ``thrust_coeff_n_s2`` and ``torque_per_thrust_m`` to stand data (module equations).

    Parameters
    ----------
    stand : StandData
        The measured points.
    rotors : tuple of str
        Names of the rotors that use these data (kept in the result).
    """
    w2 = stand.speed_rad_s ** 2
    k, k_se, k_res, k_r2 = _through_origin(w2, stand.thrust_n)
    q, q_se, q_res, q_r2 = _through_origin(stand.thrust_n, stand.torque_n_m)
    if not all(math.isfinite(v) for v in (k, k_se, k_r2, q, q_se, q_r2)):
        raise StandDataError(f"{stand.file}: the fit gives no finite coefficients -> check "
                             "the units of the columns (rad/s, N, N m)")
    if not (k > 0 and q > 0):
        raise StandDataError(f"{stand.file}: the fitted coefficients are not positive -> check "
                             "the sign and units of the thrust and torque columns")
    return RotorFit(
        file=stand.file, sha256=stand.sha256, rotors=tuple(rotors),
        n_points=len(w2), thrust_coeff_n_s2=k, thrust_coeff_se_n_s2=k_se,
        torque_per_thrust_m=q, torque_per_thrust_se_m=q_se,
        thrust_residuals_n=tuple(float(v) for v in k_res),
        torque_residuals_n_m=tuple(float(v) for v in q_res),
        thrust_r_squared=k_r2, torque_r_squared=q_r2,
        max_measured_thrust_n=float(stand.thrust_n.max()),
        speed_rad_s=tuple(float(v) for v in stand.speed_rad_s),
        thrust_n=tuple(float(v) for v in stand.thrust_n),
        torque_n_m=tuple(float(v) for v in stand.torque_n_m),
    )


def fit_svg(f: RotorFit, width: int = 360, height: int = 220) -> str:
    """An SVG plot of measured thrust against rotor speed with the fitted curve.

    Parameters
    ----------
    f : RotorFit
        The fit (with its measured points).
    width, height : int
        Size in pixels.
    """
    if not f.speed_rad_s:
        return ""
    pad = 40
    w_max = max(f.speed_rad_s) * 1.05
    t_max = max(max(f.thrust_n), f.thrust_coeff_n_s2 * w_max ** 2) * 1.05

    def xy(w: float, t: float) -> tuple[float, float]:
        return (pad + (width - 1.5 * pad) * w / w_max,
                height - pad - (height - 1.5 * pad) * t / t_max)

    curve = " ".join("{:.1f},{:.1f}".format(*xy(w_max * k / 40, f.thrust_coeff_n_s2 *
                                                 (w_max * k / 40) ** 2)) for k in range(41))
    dots = "".join('<circle cx="{:.1f}" cy="{:.1f}" r="2.5" fill="#1f77b4"/>'.format(*xy(w, t))
                   for w, t in zip(f.speed_rad_s, f.thrust_n, strict=True))
    x0, y0 = xy(0, 0)
    x1, y1 = xy(w_max, t_max)
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
            f'role="img" aria-label="thrust against rotor speed, measured and fitted">'
            f'<line x1="{x0:.1f}" y1="{y0:.1f}" x2="{x1:.1f}" y2="{y0:.1f}" stroke="black"/>'
            f'<line x1="{x0:.1f}" y1="{y0:.1f}" x2="{x0:.1f}" y2="{y1:.1f}" stroke="black"/>'
            f'<polyline points="{curve}" fill="none" stroke="#d62728"/>{dots}'
            f'<text x="{(x0 + x1) / 2:.0f}" y="{height - 8}" text-anchor="middle" '
            f'font-size="11">rotor speed, 0 to {w_max:.0f} rad/s</text>'
            f'<text x="12" y="{(y0 + y1) / 2:.0f}" font-size="11" '
            f'transform="rotate(-90 12 {(y0 + y1) / 2:.0f})" text-anchor="middle">'
            f'thrust, 0 to {t_max:.3g} N</text></svg>')

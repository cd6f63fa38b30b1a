"""Momentum wheel: the H2-ratio curve against wheel momentum, a marker, flags and sizing.

The curves come from :func:`kit.analysis.wheel.wheel_study`, once, when the panel is built
(or from a DesignReport's study); moving the momentum slider only moves the marker, interpolates
the readouts on the stored curve and recomputes the sizing figures, which are cheap. The slider
updates on release (a drag is one update). A design without a wheel shows the reason and no
figure.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from kit import plots
from kit.analysis.report import DesignReport
from kit.analysis.wheel import WheelCurve, WheelStudy, wheel_study
from kit.panels.base import Panel, as_vehicle, kv_table

_FLAG_H = re.compile(r"^h = ([-+]?[0-9.]+(?:e[-+]?[0-9]+)?) N m s")


def flagged_momenta(curve: WheelCurve) -> list[float]:
    """Momenta (N m s) of the curve's flagged points, read from the flags."""
    out = []
    for f in curve.flags:
        m = _FLAG_H.match(f)
        if m:
            out.append(float(m.group(1)))
    return out


def _interp(h: float, xs: np.ndarray, ys: np.ndarray) -> float:
    ok = np.isfinite(ys)
    if not np.any(ok):
        return math.nan
    return float(np.interp(h, xs[ok], ys[ok]))


@dataclass(frozen=True)
class WheelView:
    """Readouts at one wheel momentum h (N m s) on one case's curve."""

    h_n_m_s: float
    h2_ratio: float
    h2_ratio_fixed_gain: float
    spin_rate_rad_s: float
    wheel_speed_rad_s: float
    stored_energy_j: float
    max_body_rate_rad_s: float
    gyro_torque_n_m: float
    near_flags: tuple[str, ...]
    marker: dict


def wheel_view(veh, study: WheelStudy, curve: WheelCurve, h_n_m_s: float) -> WheelView:
    """Readouts at ``h`` interpolated on ``curve``, and the sizing at ``h`` (pure).

    The gyroscopic torque bound uses the study's largest body rate (over every case).
    """
    h = float(h_n_m_s)
    xs = np.asarray(curve.h_n_m_s, float)
    ratio = _interp(h, xs, curve.h2_ratio)
    sizing = wheel_study(veh, cases=[], chosen_h_n_m_s=h)
    rate = study.max_body_rate_rad_s
    # neighbouring grid interval of h: flags there are shown beside the readout
    i = int(np.searchsorted(xs, h))
    lo, hi = xs[max(i - 1, 0)], xs[min(i, xs.size - 1)]
    near = tuple(f for f, fh in zip(curve.flags, flagged_momenta(curve), strict=False)
                 if lo - 1e-12 <= fh <= hi + 1e-12 or abs(fh - h) < 1e-3 * study.h_max_n_m_s)
    return WheelView(
        h_n_m_s=h, h2_ratio=ratio, h2_ratio_fixed_gain=_interp(h, xs, curve.h2_ratio_fixed_gain),
        spin_rate_rad_s=_interp(h, xs, curve.spin_rate_rad_s),
        wheel_speed_rad_s=sizing.wheel_speed_rad_s, stored_energy_j=sizing.stored_energy_j,
        max_body_rate_rad_s=rate, gyro_torque_n_m=abs(h) * rate, near_flags=near,
        marker=plots.marker_data(h, ratio if math.isfinite(ratio) else 1.0))


class WheelPanel(Panel):
    """Wheel momentum slider over the H2-ratio curve of a chosen case, with sizing readouts."""

    def __init__(self, design, case=None, study: WheelStudy | None = None,
                 executor=None) -> None:
        import ipywidgets as w

        super().__init__()
        self.vehicle = veh = as_vehicle(design)
        d = veh.design
        self.title = f"Momentum wheel: {d.name}"
        self.figure, self.sources = plots.wheel_figure()
        self.layout = plots.in_document(self.figure)
        self.notice = plots.add_notice(self.figure)
        # the whole study once (every case's curve): the gyroscopic torque bound needs the
        # largest body rate over all cases; a DesignReport brings it already computed
        if study is not None:
            self.study = study
        elif isinstance(design, DesignReport):
            self.study = design.wheel
        else:
            self.study = wheel_study(veh, executor=executor)
        self.available = self.study.available
        self.show_figure = bool(self.available)
        self._curves = {self._label(c): c for c in self.study.curves}
        hmax = self.study.h_max_n_m_s if self.available else 1.0
        style = {"description_width": "initial"}
        labels = list(self._curves) or ["no failure"]
        want = [k for k, c in self._curves.items() if set(c.failed) == set(case or ())]
        self.case = w.Dropdown(options=labels, value=want[0] if want else labels[0],
                               description="case", style=style)
        self.h = w.FloatSlider(value=hmax if self.available else 0.0, min=-hmax, max=hmax,
                               step=hmax / 100, description="wheel momentum h (N m s)",
                               readout_format=".3g", continuous_update=False,
                               disabled=not self.available, style=style,
                               layout=w.Layout(width="60%"))
        self.controls = {"case": self.case, "h": self.h}
        self.case.observe(self._on_case, names="value")
        self._observe(self.h)
        self._build_widget([self.case, self.h])
        self.curve: WheelCurve | None = None
        self.view: WheelView | None = None
        if self.available:
            self._load_curve()
        self.refresh()

    @staticmethod
    def _label(curve: WheelCurve) -> str:
        return curve.label + (" (thrust ratio)" if curve.thrust_ratio else "")

    def _load_curve(self) -> None:
        """Put the chosen case's stored curve and its flags into the figure."""
        self.curve = self._curves[self.case.value]
        flagged = flagged_momenta(self.curve)
        for k, data in plots.wheel_curve_data(self.curve, flagged).items():
            plots.set_data(self.sources[k], data)
        plots.show_legend_item(self.figure, "flagged", bool(flagged))

    def _on_case(self, _change) -> None:
        self.refresh()

    def control_values(self):
        return [("case", self.case.value),
                ("wheel momentum h", plots.fmt(self.h.value, 3, "N m s"))]

    def update(self) -> str:
        if not self.available:
            raise ValueError(self.study.reason)
        if self.curve is None or self._curves.get(self.case.value) is not self.curve:
            self._load_curve()
        self.view = v = wheel_view(self.vehicle, self.study, self.curve, self.h.value)
        plots.set_data(self.sources["marker"], v.marker["marker"])
        plots.set_notice(self.notice, "" if math.isfinite(v.h2_ratio) else
                         "no H2 ratio at this momentum (no stabilising loop)")
        rows = [
            ("H2 ratio to h = 0 (LQR redesigned)", plots.fmt(v.h2_ratio, 3)),
            ("H2 ratio, h = 0 gain kept", plots.fmt(v.h2_ratio_fixed_gain, 3)),
            ("equilibrium spin rate", plots.fmt(v.spin_rate_rad_s, 3, "rad/s")),
        ]
        size = [
            ("wheel speed |h| / I_w", plots.fmt(v.wheel_speed_rad_s, 3, "rad/s")
             + f" ({plots.fmt(v.wheel_speed_rad_s * 60 / (2 * math.pi), 3, 'rpm')})"),
            ("stored energy h\u00b2 / 2 I_w", plots.fmt(v.stored_energy_j, 3, "J")),
            ("largest body rate (all cases)", plots.fmt(v.max_body_rate_rad_s, 3, "rad/s")),
            ("gyroscopic torque bound |h| \u03c9", plots.fmt(v.gyro_torque_n_m, 3, "N m")),
        ]
        flags = "".join(f"<p class='rb-note'>flag: {plots.html_escape(f)}</p>"
                        for f in (v.near_flags or ()))
        allf = kv_table([(str(i + 1), f) for i, f in enumerate(self.curve.flags)] or
                        [("", "none")], f"Flags on this curve ({self.curve.label})")
        return (kv_table(rows, "At the chosen momentum (interpolated on the curve)")
                + kv_table(size, "Wheel sizing") + flags + allf)

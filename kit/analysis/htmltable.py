"""Static HTML tables for the results' ``_repr_html_`` (no kernel, no scripts, strings escaped)."""

from __future__ import annotations

import html
import math

import numpy as np

CSS_CLASS = "rb-table"
#: Magnitudes below this print as 0: rounding noise of a computation (1.1e-16 from a
#: difference of equal numbers), far below any figure a design file can give (README, Limits).
ROUNDING_ZERO = 1e-13
#: Status colours (text, background): blue for PASS, vermillion for FAIL, told apart with every
#: common colour-vision deficiency and in greyscale; the status is also written as a word.
PASS_COLOURS = ("#163f73", "#e4edf8")
FAIL_COLOURS = ("#8f2d00", "#fde3d3")


def num(x, sig: int = 4) -> str:
    """A number with ``sig`` significant figures; booleans as yes/no; None/nan as a dash.

    The one number format of tables and readouts (plain Unicode, safe in HTML).
    """
    if x is None:
        return "\u2013"
    if isinstance(x, bool | np.bool_):
        return "yes" if x else "no"
    x = float(x)
    if not math.isfinite(x):
        return "\u2013" if math.isnan(x) else ("\u221e" if x > 0 else "\u2212\u221e")
    if abs(x) < ROUNDING_ZERO:
        return "0"
    return f"{x:.{sig}g}"


def table(headers, rows, caption: str = "") -> str:
    """An HTML table; cells that are str are escaped, numbers formatted with :func:`num`."""

    def cell(v):
        if isinstance(v, str):
            return html.escape(v)
        if isinstance(v, tuple) and len(v) == 2 and v[0] == "raw":
            return v[1]
        return num(v)

    head = "".join(f"<th>{html.escape(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{cell(v)}</td>" for v in r) + "</tr>" for r in rows)
    cap = f"<caption>{html.escape(caption)}</caption>" if caption else ""
    return (f'<table class="{CSS_CLASS}">{cap}<thead><tr>{head}</tr></thead>'
            f"<tbody>{body}</tbody></table>")


def verdict(ok: bool) -> tuple:
    fg, bg = PASS_COLOURS if ok else FAIL_COLOURS
    style = f'style="color:{fg};background:{bg};padding:0 .3rem"'
    return ("raw", f'<b class="rb-pass" {style}>&#10003; PASS</b>' if ok
            else f'<b class="rb-fail" {style}>&#10007; FAIL</b>')


def hover_html(h) -> str:
    rows = [(n, f, fm, f / fm) for n, f, fm in zip(h.names, h.thrust_n, h.max_thrust_n,
                                                   strict=True)]
    t1 = table(["rotor", "hover thrust (N)", "max thrust (N)", "fraction"], rows,
               "Hover thrusts (least effort)")
    m = h.torque_margin_n_m
    t2 = table(["figure", "value"], [
        ("thrust-to-weight", h.thrust_to_weight),
        ("hover thrust fraction (busiest rotor)", h.hover_thrust_fraction),
        ("allocation rank", h.allocation_rank),
        ("roll torque margin (N m)", m[0]), ("pitch torque margin (N m)", m[1]),
        ("yaw torque margin (N m)", m[2]),
        ("induced hover power, momentum theory (W)", h.induced_power_w),
    ], "Hover figures")
    return t1 + t2


def equilibrium_html(eq) -> str:
    if not eq.found:
        return table(["case", "result"], [(eq.label, "no equilibrium: " + eq.reason)])
    rows = [
        ("free directions", eq.free_directions),
        ("spin rate about n (rad/s)", eq.spin_rate_rad_s),
        ("spin rate (Hz)", eq.spin_rate_rad_s / (2 * math.pi)),
        ("n_bar (world up in body)", ", ".join(num(v) for v in eq.n_bar)),
        ("tilt of spin axis from body z (deg)", eq.tilt_deg),
        ("radius of the CoM circle (m)", eq.circle_radius_m),
        ("scaled residual", eq.residual),
    ]
    t1 = table(["figure", "value"], rows, f"Relaxed hover: {eq.label}")
    t2 = table(["rotor", "thrust (N)", "fraction of max", "speed (rad/s)"],
               [(n, f, fr, s) for n, f, fr, s in zip(eq.names, eq.thrust_n, eq.thrust_fraction,
                                                     eq.rotor_speed_rad_s, strict=True)])
    return t1 + t2


def control_html(c) -> str:
    rows = [("controllable", c.controllable), ("controllability rank", c.controllability_rank),
            ("controllability distance (relative)", c.controllability_distance),
            ("H2 norm, torque x/y to n_x, n_y (rad per N m per sqrt(Hz))", c.h2_norm)]
    if c.closed_loop_poles is not None:
        rows.append(("closed-loop poles", ", ".join(
            f"{num(p.real)}{'+' if p.imag >= 0 else '-'}{num(abs(p.imag))}j"
            for p in c.closed_loop_poles)))
    rows.append(("note", c.note))
    return table(["figure", "value"], rows, "Linear control (reduced model)")


def risk_html(r) -> str:
    rows = [(n, s, sd, up, lo) for n, s, sd, up, lo in zip(
        r.inputs, r.thrust_std_n, r.thrust_rate_std_n_s, r.upper_margin_n, r.lower_margin_n,
        strict=True)]
    t = table(["rotor", "thrust std (N)", "thrust-rate std (N/s)", "margin up (N)",
               "margin down (N)"], rows, "Thrust deviations under gusts")
    return t + table(["figure", "value"], [
        ("thrust-saturation rate (1/s)", r.crossing_rate_per_s),
        ("probability of at least one saturation within 1 s", r.probability_per_s)])


def wheel_html(w) -> str:
    if not w.available:
        return f"<p>{html.escape(w.reason)}</p>"
    rows = [("h_max (N m s)", w.h_max_n_m_s), ("chosen h (N m s)", w.chosen_h_n_m_s),
            ("wheel speed (rad/s)", w.wheel_speed_rad_s), ("stored energy (J)", w.stored_energy_j),
            ("largest body rate (rad/s)", w.max_body_rate_rad_s),
            ("gyroscopic torque at that rate (N m)", w.gyro_torque_n_m)]
    t = table(["figure", "value"], rows, "Momentum wheel sizing")
    crow = []
    for c in w.curves:
        finite = c.h2_ratio[np.isfinite(c.h2_ratio)]
        crow.append((c.label, float(finite.min()) if finite.size else None,
                     float(finite.max()) if finite.size else None, "; ".join(c.flags) or "none"))
    return t + table(["case", "min H2 ratio", "max H2 ratio", "flags"], crow,
                     "H2 ratio to h = 0 over -h_max..h_max (LQR redesigned per h)")


def checks_html(checks) -> str:
    rows = [(c.case or "design", c.name + (f" ({c.note})" if c.note else ""),
             ("raw", num(c.value)), c.relation,
             ("raw", num(c.limit)), c.unit, verdict(c.passed)) for c in checks]
    return table(["case", "check", "value", "", "limit", "unit", "result"], rows, "Design checks")

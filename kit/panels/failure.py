"""Rotor failure: choose the failed rotors, move along the free directions, see the result.

For the chosen failure set the panel shows the relaxed-hover equilibrium (spin rate, tilt,
thrusts against limits, the circle the centre of mass flies), the closed-loop poles of the
reduced model under LQR, the saturation risk and the checks, all from
:func:`kit.analysis.report.analyse_case`. With ``k`` working rotors the equilibria form a
family with ``k - 1`` free directions; the thrust-ratio sliders move along it (the overall
scale is fixed by the weight), "least effort" picks the member of smallest ``sum f^2``.

The nonlinear time response (:func:`kit.analysis.simulate.simulate_failure`) costs 0.2 to 1.5 s,
so a slider change marks it out of date and the "simulate" button (or "simulate on change")
recomputes it; the panel simulates once when it is built, so a record shows it. The button is
disabled while the simulation runs, and a line beside it says what runs and, after, how long it
took. Its horizon is by default the one the record's recovery simulation uses (the failure
time, the detection delay, then a number of the slowest time constants:
:func:`kit.analysis.simulate.horizon_s`); unticking "horizon as in the record" uses the horizon
slider instead.

Failed rotors are chosen with one checkbox per rotor. In thrust-ratio mode a change of the
failed set resets the ratio sliders to the least-effort equilibrium of the new set (a rotor
that was failed must not keep the ratio 0 it had then). When there is no equilibrium the
figures keep their axes and show the reason over the plot area.
"""

from __future__ import annotations

import math
import time
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

from kit import plots
from kit.analysis.htmltable import checks_html
from kit.analysis.report import CaseResult, DesignReport, analyse_case
from kit.analysis.vehicle import Vehicle
from kit.panels.base import Panel, as_vehicle, kv_table

LEAST_EFFORT = "least effort"
RATIOS = "thrust ratios"
#: Cached case results per panel (a slider revisiting a value is instant).
CACHE_SIZE = 128
#: Horizon slider's starting value, s (used when the record's horizon is not).
DEFAULT_HORIZON_S = 3.0


@dataclass(frozen=True)
class FailureView:
    """What the failure panel shows for one choice of controls."""

    case: CaseResult
    message: str
    figures: dict

    @property
    def eq(self):
        return self.case.eq


def ratio_key(thrust_ratio: dict | None) -> tuple | None:
    return None if thrust_ratio is None else tuple(sorted(
        (k, round(float(v), 6)) for k, v in thrust_ratio.items()))


def check_inputs(veh: Vehicle, failed, thrust_ratio: dict | None) -> str:
    """Why a combination of controls cannot be analysed ('' when it can)."""
    names = veh.names
    unknown = [f for f in failed if f not in names]
    if unknown:
        return f"unknown rotor(s) {', '.join(unknown)}: the rotors are {', '.join(names)}"
    if len(set(failed)) >= len(names):
        return "every rotor has failed: there is nothing left to fly with; keep at least one"
    if thrust_ratio is not None:
        working = [n for n in names if n not in failed]
        vals = [thrust_ratio.get(n, math.nan) for n in working]
        if any(not math.isfinite(v) or v < 0 for v in vals):
            return "thrust ratios must be given for every working rotor and be >= 0"
        if sum(vals) <= 0:
            return "every thrust ratio is zero: give at least one working rotor a ratio above 0"
    return ""


def failure_view(veh: Vehicle, failed=(), thrust_ratio: dict | None = None, hint=None,
                 case: CaseResult | None = None) -> FailureView:
    """Equilibrium, control, risk and checks of one failure choice, with the figure data.

    Parameters
    ----------
    veh : Vehicle
    failed : sequence of str
        Failed rotors, by name.
    thrust_ratio : dict or None
        Ratios of the working thrusts (None: least effort).
    hint : (spin rate in rad/s, n_bar) or None
        Start of the equilibrium search (the neighbouring point of a slider).
    case : CaseResult or None
        A result already computed for exactly these inputs.
    """
    failed = tuple(n for n in veh.names if n in set(failed))
    why = check_inputs(veh, failed, thrust_ratio)
    if why:
        raise ValueError(why)
    if case is None:
        case = analyse_case(veh, failed, thrust_ratio, hint=hint)
    eq, ctl = case.eq, case.ctl
    msg = "" if eq.found else f"no equilibrium: {eq.reason}"
    ol = ctl.open_loop_poles if eq.found and np.all(np.isfinite(ctl.A)) else None
    figs = {
        "thrust": plots.thrust_data(veh.names, eq.thrust_n, veh.max_thrust_n,
                                    working=veh.working_mask(failed), spin=veh.spin,
                                    threshold_fraction=None),
        "poles": plots.poles_data(ctl.closed_loop_poles, ol),
        "circle": plots.circle_data(eq.circle_radius_m if eq.found else math.nan),
    }
    return FailureView(case, msg, figs)


def least_effort_ratios(eq, names) -> dict[str, float]:
    """Thrusts of an equilibrium as ratios to the largest one (the sliders' starting point)."""
    f = np.nan_to_num(eq.thrust_n)
    top = float(np.max(f)) if f.size and np.max(f) > 0 else 1.0
    return {n: float(fi / top) for n, fi in zip(names, f, strict=True)}


class FailurePanel(Panel):
    """Failed rotors and free directions in; equilibrium, poles, risk and time response out."""

    def __init__(self, design, failed=None, thrust_ratio: dict | None = None,
                 simulate: bool = True, horizon_s: float | None = None) -> None:
        import ipywidgets as w
        from bokeh.layouts import column, row

        super().__init__()
        self.vehicle = veh = as_vehicle(design)
        d = veh.design
        self.title = f"Rotor failure: {d.name}"
        self._cache: OrderedDict = OrderedDict()
        if isinstance(design, DesignReport):
            for c in design.cases:
                self._cache[(tuple(c.eq.failed), ratio_key(c.eq.thrust_ratio))] = c
        if failed is None:
            if d.failure_cases:
                failed = d.failure_cases[0].failed
                thrust_ratio = d.failure_cases[0].ratio_dict() if thrust_ratio is None \
                    else thrust_ratio
            else:
                failed = (veh.names[0],)
        self.thrust_fig, st = plots.thrust_figure(veh.names, "Thrusts at the equilibrium",
                                                  threshold=False)
        self.poles_fig, sp = plots.poles_figure()
        self.circle_fig, sc = plots.circle_figure()
        self.rates_fig, self.thrust_t_fig, sr = plots.response_figures(
            veh.names, veh.max_thrust_n)
        self.sources = {"thrust": st, "poles": sp, "circle": sc, "response": sr}
        self.notices = {k: plots.add_notice(f) for k, f in (
            ("thrust", self.thrust_fig), ("poles", self.poles_fig),
            ("circle", self.circle_fig), ("rates", self.rates_fig),
            ("thrust_t", self.thrust_t_fig))}
        self.layout = plots.in_document(column(
            row(self.thrust_fig, self.poles_fig, self.circle_fig),
            row(self.rates_fig, self.thrust_t_fig)))

        style = {"description_width": "initial"}
        self.failed_boxes = {n: w.Checkbox(value=n in set(failed), description=n, indent=False,
                                           layout=w.Layout(width="auto"))
                             for n in veh.names}
        self.mode = w.ToggleButtons(options=[LEAST_EFFORT, RATIOS],
                                    value=RATIOS if thrust_ratio else LEAST_EFFORT,
                                    description="equilibrium", style=style)
        self.ratios = {n: w.FloatSlider(value=1.0, min=0.0, max=1.0, step=0.01, description=n,
                                        continuous_update=False, readout_format=".2f",
                                        style=style) for n in veh.names}
        if thrust_ratio:
            top = max(thrust_ratio.values())
            for n, r in thrust_ratio.items():
                self.ratios[n].value = float(r) / top
        # horizon_s None: the record's horizon (a function of the case, see horizon_s)
        self.record_horizon = w.Checkbox(value=horizon_s is None, indent=False,
                                         description="horizon as in the record",
                                         layout=w.Layout(width="auto"))
        self.horizon = w.FloatSlider(value=DEFAULT_HORIZON_S if horizon_s is None else horizon_s,
                                     min=0.5, max=30.0, step=0.5, description="horizon (s)",
                                     continuous_update=False, style=style,
                                     disabled=horizon_s is None)
        self.sim_status = w.HTML("")
        self.simulate_button = w.Button(description="simulate", icon="play",
                                        tooltip="run the nonlinear simulation of the failure")
        self.auto_simulate = w.Checkbox(value=False, description="simulate on change",
                                        indent=False)
        self.controls = {**{f"failed:{n}": b for n, b in self.failed_boxes.items()},
                         "mode": self.mode, "horizon": self.horizon,
                         "record_horizon": self.record_horizon,
                         "auto_simulate": self.auto_simulate,
                         **{f"ratio:{n}": s for n, s in self.ratios.items()}}
        self.view: FailureView | None = None
        self.sim = None
        self.sim_message = "not simulated yet"
        self.last_simulate_s = 0.0
        self._observe(self.horizon, *self.ratios.values())
        self.record_horizon.observe(self._on_record_horizon, names="value")
        for b in self.failed_boxes.values():
            b.observe(self._on_failed, names="value")
        self.mode.observe(self._on_mode, names="value")
        self.simulate_button.on_click(lambda _b: self.simulate())
        ratio_box = w.VBox(list(self.ratios.values()))
        failed_box = w.VBox([w.HTML("<b>failed rotors</b>"), *self.failed_boxes.values()],
                            layout=w.Layout(width="180px"))
        self._build_widget([
            w.HBox([failed_box, w.VBox([self.mode, ratio_box])]),
            w.HBox([self.record_horizon, self.horizon, self.simulate_button,
                    self.auto_simulate]),
            self.sim_status,
        ])
        self._auto_once = simulate
        self.refresh()
        self._auto_once = False

    # -- controls -------------------------------------------------------------------------

    def failed_set(self) -> tuple[str, ...]:
        """The ticked rotors, in file order."""
        return tuple(n for n, b in self.failed_boxes.items() if b.value)

    def set_failed(self, names) -> None:
        """Tick exactly ``names`` (one refresh)."""
        names = set(names)
        with self.hold():
            for n, b in self.failed_boxes.items():
                b.value = n in names
            if self.mode.value == RATIOS:
                self._set_least_effort_ratios()

    def thrust_ratio(self) -> dict | None:
        if self.mode.value != RATIOS:
            return None
        failed = set(self.failed_set())
        return {n: float(s.value) for n, s in self.ratios.items() if n not in failed}

    def _set_least_effort_ratios(self) -> None:
        """Put the least-effort thrusts of the ticked failure set into the ratio sliders."""
        veh = self.vehicle
        failed = self.failed_set()
        if check_inputs(veh, failed, None):
            return
        case = self._case(failed, None)
        if case is None:
            case = analyse_case(veh, failed, None)
            self._remember((failed, None), case)
        if not case.eq.found:
            return
        for n, r in least_effort_ratios(case.eq, veh.names).items():
            self.ratios[n].value = r if n not in failed else 0.0

    def _on_failed(self, _change) -> None:
        if self._holding:
            return
        if self.mode.value == RATIOS:
            # ratios reset to the new set's least-effort equilibrium (a rotor that was failed
            # would otherwise keep its ratio 0 and leave the vehicle with no equilibrium)
            with self.hold():
                self._set_least_effort_ratios()
        else:
            self.refresh()

    def _on_record_horizon(self, change) -> None:
        self.horizon.disabled = bool(change["new"])
        self.refresh()

    def t_end_s(self) -> float | None:
        """End time of the simulation, in s (None: the record's horizon for the case)."""
        return None if self.record_horizon.value else float(self.horizon.value)

    def _on_mode(self, change) -> None:
        if change["new"] == RATIOS:
            with self.hold():
                self._set_least_effort_ratios()
        else:
            self.refresh()

    def control_values(self):
        rows = [("failed rotors", ", ".join(self.failed_set()) or "none"),
                ("equilibrium", self.mode.value)]
        ratio = self.thrust_ratio()
        if ratio is not None:
            rows.append(("thrust ratios", ", ".join(f"{k} {v:.2f}" for k, v in ratio.items())))
        rows.append(("simulation horizon", "as in the record" if self.t_end_s() is None
                     else plots.fmt(self.horizon.value, 3, "s")))
        return rows

    # -- computing ------------------------------------------------------------------------

    def _case(self, failed, ratio) -> CaseResult | None:
        key = (tuple(failed), ratio_key(ratio))
        if key in self._cache:
            self._cache.move_to_end(key)
            return self._cache[key]
        return None

    def _remember(self, key, case) -> None:
        self._cache[key] = case
        while len(self._cache) > CACHE_SIZE:
            self._cache.popitem(last=False)

    def update(self) -> str:
        veh = self.vehicle
        failed = self.failed_set()
        for n, s in self.ratios.items():
            s.disabled = self.mode.value != RATIOS or n in failed
        ratio = self.thrust_ratio()
        hint = None
        prev = self.view.eq if self.view is not None else None
        if prev is not None and prev.found and set(prev.failed) == set(failed):
            hint = (prev.spin_rate_rad_s, prev.n_bar)
        cached = self._case(failed, ratio)
        try:
            view = failure_view(veh, failed, ratio, hint=hint, case=cached)
        except ValueError as exc:
            self._clear_figures(str(exc))
            self.view = None
            self._drop_sim(str(exc))
            raise
        self._remember((failed, ratio_key(ratio)), view.case)
        self.view = view
        for name in ("thrust", "poles", "circle"):
            for k, data in view.figures[name].items():
                plots.set_data(self.sources[name][k], data)
        for k in ("thrust", "poles", "circle"):
            plots.set_notice(self.notices[k], view.message)
        if self.auto_simulate.value or self._auto_once:
            self._simulate_now()
        else:
            self._drop_sim("out of date: press 'simulate' (or tick 'simulate on change')")
        self.message = view.message
        return self.readouts()

    def _clear_figures(self, why: str = "") -> None:
        """Empty the equilibrium figures (axes kept) and say why over them."""
        veh = self.vehicle
        # the bars stay (at zero, as failed) so the thrust axis keeps its limits
        plots.set_data(self.sources["thrust"]["bars"], plots.thrust_data(
            veh.names, np.zeros(veh.n), veh.max_thrust_n, working=np.zeros(veh.n, bool),
            spin=veh.spin, threshold_fraction=None)["bars"])
        for name in ("poles", "circle"):
            for key, src in self.sources[name].items():
                if key != "anchor":
                    plots.set_data(src, {c: [] for c in src.data})
        for k in ("thrust", "poles", "circle"):
            plots.set_notice(self.notices[k], why)

    def _drop_sim(self, why: str) -> None:
        self.sim = None
        self.sim_message = why
        for k, data in plots.response_data(None, self.vehicle.n).items():
            plots.set_data(self.sources["response"][k], data)
        self._sim_notice()
        self.sim_status.value = self._sim_status_html()

    def _sim_notice(self) -> None:
        text = "" if self.sim is not None else (self.sim_message or "not simulated")
        for k in ("rates", "thrust_t"):
            plots.set_notice(self.notices[k], text)

    def _simulate_now(self) -> None:
        from kit.analysis.simulate import simulate_failure
        from kit.errors import EquilibriumNotFound

        t0 = time.perf_counter()
        failed = self.failed_set()
        try:
            self.sim = simulate_failure(self.vehicle, failed, t_end=self.t_end_s(),
                                        thrust_ratio=self.thrust_ratio())
            self.sim_message = ""
        except (EquilibriumNotFound, ValueError) as exc:
            self.sim = None
            self.sim_message = f"not simulated: {exc}"
        self.last_simulate_s = time.perf_counter() - t0
        for k, data in plots.response_data(self.sim, self.vehicle.n).items():
            plots.set_data(self.sources["response"][k], data)
        self._sim_notice()
        self.sim_status.value = self._sim_status_html()

    def simulate(self) -> None:
        """Run the nonlinear simulation for the current controls and show it.

        The button is disabled (and says so) while it runs; the figures change in one message.
        """
        b = self.simulate_button
        b.disabled, b.description = True, "simulating..."
        failed = ", ".join(self.failed_set()) or "none"
        horizon = ("the record's horizon" if self.t_end_s() is None
                   else f"{plots.fmt(self.t_end_s(), 3, 's')}")
        self.sim_status.value = (f"<span class='rb-note'>simulating the failure of {failed} "
                                 f"over {horizon}...</span>")
        fw = self.figure_widget
        if fw is not None:
            fw.hold()
        try:
            if self.view is None or not self.view.eq.found:
                self.sim_message = "not simulated: there is no equilibrium to hold"
                self._sim_notice()
            else:
                self._simulate_now()
            self.readout_html = self.readouts()
            self.refit()
        finally:
            if fw is not None:
                fw.flush()
            b.disabled, b.description = False, "simulate"
        self._show_text()
        self.sim_status.value = self._sim_status_html()

    def _sim_status_html(self) -> str:
        if self.sim is None:
            return f"<span class='rb-note'>{plots.html_escape(self.sim_message)}</span>"
        return (f"<span class='rb-note'>simulated {plots.fmt(float(self.sim.t[-1]), 3, 's')} "
                f"in {plots.fmt(self.last_simulate_s, 2, 's')}</span>")

    # -- readouts -------------------------------------------------------------------------

    def readouts(self) -> str:
        if self.view is None:
            return ""
        c = self.view.case
        eq, ctl, risk = c.eq, c.ctl, c.risk
        if eq.found:
            rows = [
                ("free directions", str(eq.free_directions)),
                ("static-hover control authority index",
                 "\u2013" if eq.authority is None else
                 f"{plots.fmt(eq.authority.index, 3)} "
                 f"({'static hover exists' if eq.authority.static_hover else 'no static hover'})"),
                ("operating point chosen by", eq.chosen_by or "\u2013"),
                ("spin rate about n", f"{plots.fmt(eq.spin_rate_rad_s, 3, 'rad/s')} "
                 f"({plots.fmt(eq.spin_rate_rad_s / (2 * math.pi), 3, 'Hz')})"),
                ("tilt of the spin axis from body z", plots.fmt(eq.tilt_deg, 3, "deg")),
                ("radius of the CoM circle", plots.fmt(eq.circle_radius_m, 3, "m")),
                ("busiest rotor", plots.fmt(float(np.nanmax(eq.thrust_fraction)) * 100, 3, "%")
                 + " of its max thrust"),
                ("controllable (reduced model)", plots.fmt(ctl.controllable)),
                ("controllability distance", plots.fmt(ctl.controllability_distance, 3)),
                ("H2 norm, torque to n_x, n_y", plots.fmt(ctl.h2_norm, 3,
                                                           "rad per N m per sqrt(Hz)")),
                ("thrust-saturation rate", plots.fmt(risk.crossing_rate_per_s, 2, "1/s")
                 if risk is not None else "\u2013 (no stabilising loop)"),
            ]
        else:
            rows = [("equilibrium", "none")]
        sim_rows = [("time response", self.sim_message or "computed")]
        if self.sim is not None:
            s = self.sim
            sim_rows += [
                ("simulated time", plots.fmt(float(s.t[-1]), 3, "s")
                 + (" (the record's horizon)" if self.t_end_s() is None else "")),
                ("converged", plots.fmt(s.converged)),
                ("final spin rate", plots.fmt(s.final_spin_rate_rad_s, 3, "rad/s")),
                ("peak body rates p, q, r", ", ".join(plots.fmt(x, 3) for x in
                                                      s.peak_body_rate_rad_s) + " rad/s"),
                ("altitude change at the end", plots.fmt(float(s.altitude_m[-1]), 3, "m")),
            ]
        return (kv_table(rows, f"Relaxed hover: {eq.label}") + kv_table(sim_rows, "Simulation")
                + checks_html(c.checks))

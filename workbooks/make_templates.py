"""Write the workbook templates (and, with --execute, their stored outputs).

The templates are generated so that their cells stay consistent; edit this file, then run

    .venv/bin/python workbooks/make_templates.py --execute     (make outputs)

which rewrites every ``*.ipynb`` here and executes it in place against its default demo design,
so that ``pytest --nbval`` compares a fresh run against these stored outputs. Refresh them only
when a number changed on purpose, in a commit that says why.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

HERE = Path(__file__).resolve().parent

CAUTION_MD = (
    "> **Caution.** This workbook is a calculation, not a flight clearance; read the cautions "
    "that close it before any flight test."
)

PARAMS_NOTE = "# parameters: the only cell to edit; a record injects its own DESIGN_PATH below\n"


def header(title: str, purpose: str, equations: str, references: str, design: str) -> str:
    return (
        f"# {title}\n\n"
        f"**Purpose.** {purpose}\n\n"
        f"**Equations used.** {equations}\n\n"
        f"**References.** {references}\n\n"
        f"**Design file.** The parameters cell below names it (default: `{design}`, an "
        "invented demo vehicle). Frames and signs: body frame at the centre of mass, x forward, "
        "y left, z up along the thrust; rotor spin +1 when its angular velocity points along "
        "+z.\n\n" + CAUTION_MD
    )


def code(src: str, tags=()) -> nbformat.NotebookNode:
    cell = new_code_cell(src.strip("\n"))
    if tags:
        cell.metadata["tags"] = list(tags)
    return cell


def md(src: str) -> nbformat.NotebookNode:
    return new_markdown_cell(src.strip("\n"))


def params(design: str) -> nbformat.NotebookNode:
    return code(PARAMS_NOTE + f'DESIGN_PATH = "../data/designs/{design}"', tags=["parameters"])


OPEN = """
from IPython.display import display  # noqa: F401 (used by later cells)

from kit import panels
from kit import workbook as wb
from kit.analysis.vehicle import Vehicle

opened = wb.open_design(DESIGN_PATH)
veh = Vehicle.from_design(opened.design, opened.mp)
panels.setup()
"""

CLOSE = [code("wb.Cautions()")]


def hover_nb():
    cells = [
        md(header(
            "Hover workbook",
            "Mass properties, the rotor allocation, nominal hover thrusts, torque authority and "
            "the hover LQR of one design revision.",
            "parallel-axis theorem for the inertia; allocation "
            "$[T, \\tau_x, \\tau_y, \\tau_z]^T = M f$ with columns "
            "$(1, y_i, -x_i, -s_i\\kappa_i)$; "
            "least-effort thrusts; induced power $P = T^{3/2}/\\sqrt{2\\rho A}$; reduced attitude "
            "model and LQR.",
            "Beer & Johnston, Vector Mechanics for Engineers: Dynamics (mass moments of "
            "inertia); Leishman, Principles of Helicopter Aerodynamics, 2nd ed., ch. 2; Anderson "
            "& Moore, Optimal Control: Linear Quadratic Methods.",
            "survey_quad.toml")),
        params("survey_quad.toml"),
        code(OPEN),
        md("## Design and mass properties"),
        code("opened"),
        code("panels.OverviewPanel(veh)"),
        md("## Equations\nDerived with sympy for this design's structure (rotor count, wheel, "
           "drag law); sums run over the rotors."),
        code("wb.Equations(veh.structure)"),
        md("## Hover"),
        code("""
from kit.analysis.hover import analyse_hover

hover = analyse_hover(veh)
hover
"""),
        code("""
from kit.analysis.report import analyse_case

nominal = analyse_case(veh, ())
display(nominal.eq, nominal.ctl, nominal.risk)
"""),
        md("## Explore\nThe payload slider adds a point mass at the centre of mass."),
        code("panels.HoverPanel(veh)"),
        md("## Design checks"),
        code("""
from kit.analysis.checks import hover_checks

wb.Checks(hover_checks(hover, opened.design.review) + list(nominal.checks))
"""),
        *CLOSE,
    ]
    return cells


def rotor_out_nb():
    return [
        md(header(
            "Rotor-out workbook",
            "Relaxed-hover equilibria after rotor failures, their linear control (LQR), "
            "saturation risk under gusts, principal-axis spin stability, and a nonlinear "
            "simulation of the failure and the switch of controller.",
            "relaxed hover: $\\bar\\omega = w\\,\\bar n$, moment balance with rotor and wheel "
            "momentum, $n_z\\sum f_i = m g$; least-effort member $\\min\\sum f_i^2$; reduced "
            "model $x = (p, q, n_x, n_y)$, $\\dot x = A x + B u$; LQR; Rice's up-crossing rate "
            "$\\nu = \\frac{\\sigma_{\\dot u}}{2\\pi\\sigma_u} e^{-a^2/2\\sigma_u^2}$.",
            "Mueller & D'Andrea, ICRA 2014 (relaxed hover); Landau & Lifshitz, Mechanics, "
            "free rotation of a rigid body; Rice, Bell Syst. Tech. J. 24 (1945).",
            "survey_quad.toml")),
        params("survey_quad.toml"),
        code(OPEN),
        code("opened"),
        md("## Equations"),
        code("wb.Equations(veh.structure)"),
        md("## Every failure case\nThe no-failure case, the sets named by `review.failure_sets`, "
           "then the design's own `[[failure_case]]` entries."),
        code("""
from kit.analysis.equilibrium import all_cases
from kit.analysis.report import analyse_case

cases = [analyse_case(veh, failed, ratio) for failed, ratio in all_cases(veh)]
wb.CasesTable(cases)
"""),
        md("## The design's failure cases in detail"),
        code("""
for fc in opened.design.failure_cases:
    case = next(c for c in cases
                if set(c.eq.failed) == set(fc.failed) and c.eq.thrust_ratio == fc.ratio_dict())
    display(case.eq, case.ctl)
    if case.risk is not None:
        display(case.risk)
"""),
        md("## Principal-axis spin stability"),
        code("""
from kit.analysis.report import spin_section

spin = spin_section(veh, [c.eq for c in cases])
spin
"""),
        md("## Nonlinear check of the first failure case\nHover under the hover LQR; the rotors "
           "fail at 0.5 s; after a detection delay of 0.05 s the relaxed-hover LQR takes over. "
           "The yaw spin-up takes several seconds (time constant J_zz / gamma_z), so the run "
           "lasts 12 s. Height and position are not controlled in this model: the vehicle "
           "sinks and drifts, which the summary reports."),
        code("""
from kit.analysis.simulate import simulate_failure
from kit.errors import EquilibriumNotFound

first = opened.design.failure_cases[0] if opened.design.failure_cases else None
if first is not None:
    try:
        sim = simulate_failure(veh, first.failed, thrust_ratio=first.ratio_dict(), t_end=12.0)
        display(sim)
    except EquilibriumNotFound as exc:  # a result with its reason, not a failed workbook
        print(f"nonlinear check not run: {exc}")
"""),
        md("## Explore"),
        code("panels.FailurePanel(veh)"),
        md("## Design checks"),
        code("wb.Checks([k for c in cases for k in c.checks] + spin.checks())"),
        *CLOSE,
    ]


def wheel_nb():
    return [
        md(header(
            "Momentum-wheel workbook",
            "How a momentum wheel along body z changes the attitude loop's sensitivity to "
            "torque disturbances, in hover and after rotor failures, and what the wheel must "
            "be (speed, stored energy, gyroscopic torque).",
            "H2 norm $\\|G\\|_2^2 = \\mathrm{tr}(C W C^T)$, "
            "$A_{cl}W + W A_{cl}^T + B_d B_d^T = 0$, from torques about $x_B, y_B$ to "
            "$(n_x, n_y)$, LQR redesigned for each wheel momentum $h$; ratio to $h = 0$; "
            "stored energy $E = h^2 / 2 I_w$.",
            "Zhou, Doyle & Glover, Robust and Optimal Control (H2 norm); Hughes, Spacecraft "
            "Attitude Dynamics (gyrostats).",
            "wheel_quad.toml")),
        params("wheel_quad.toml"),
        code(OPEN),
        code("opened"),
        md("## Equations"),
        code("wb.Equations(veh.structure)"),
        md("## Wheel study"),
        code("""
from kit.analysis.hover import analyse_hover
from kit.analysis.wheel import wheel_study

study = wheel_study(veh)
display(study)
if study.available:
    display(wb.GyroscopicTorque(study, analyse_hover(veh)))
"""),
        md("## Explore\nThe slider moves along the precomputed H2-ratio curve of the chosen case "
           "(for a design with a wheel)."),
        code("panels.WheelPanel(veh, study=study) if study.available else None"),
        md("## Design checks"),
        code("""
from kit.analysis.checks import wheel_checks

wb.Checks(wheel_checks(study))
"""),
        *CLOSE,
    ]


def review_nb():
    return [
        md(header(
            "Design review workbook",
            "Every check of the hover, rotor-out and momentum-wheel workbooks in one pass/fail "
            "summary, with the placement map of one part.",
            "as in the three other workbooks.",
            "as in the three other workbooks.",
            "survey_quad.toml")),
        params("survey_quad.toml"),
        code(OPEN),
        code("opened"),
        md("## Whole-design analysis"),
        code("""
from kit.analysis.report import analyze

report = analyze(opened.design)
report
"""),
        code("""
display(report.hover, report.spin)
if opened.design.wheel is not None:
    display(report.wheel, wb.GyroscopicTorque(report.wheel, report.hover))
"""),
        md("## Placement of the heaviest part\nThe heaviest part by mass is moved over a 5 x 5 "
           "grid in x and y; each point recomputes mass properties, equilibria, control and "
           "risk."),
        code("""
parts = opened.design.parts
heaviest = max(parts, key=lambda p: p.mass_kg).name if parts else None
print(f"heaviest part: {heaviest}" if heaviest else "no parts (a measured [body]): nothing to move")
panels.PlacementPanel(veh, part=heaviest, points=5, compute=True) if heaviest else None
"""),
        md("## Summary of the design checks"),
        code("wb.Checks(report.checks)"),
        *CLOSE,
    ]


NOTEBOOKS = {
    "hover.ipynb": hover_nb,
    "rotor_out.ipynb": rotor_out_nb,
    "momentum_wheel.ipynb": wheel_nb,
    "design_review.ipynb": review_nb,
}


def build(name: str) -> nbformat.NotebookNode:
    nb = new_notebook(cells=NOTEBOOKS[name]())
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3",
                                 "language": "python"}
    nb.metadata["language_info"] = {"name": "python"}
    for i, cell in enumerate(nb.cells):
        cell["id"] = f"{Path(name).stem}-{i:02d}"
    return nb


def execute(path: Path) -> None:
    from nbclient import NotebookClient

    nb = nbformat.read(path, as_version=4)
    os.environ.setdefault("BOKEH_SIMPLE_IDS", "yes")
    client = NotebookClient(nb, timeout=600, kernel_name="python3",
                            resources={"metadata": {"path": str(HERE)}})
    client.execute()
    for cell in nb.cells:
        cell.metadata.pop("execution", None)
    nbformat.write(nb, path)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--execute", action="store_true", help="store fresh outputs")
    ap.add_argument("names", nargs="*", default=list(NOTEBOOKS))
    args = ap.parse_args(argv)
    for name in args.names:
        path = HERE / name
        nbformat.write(build(name), path)
        if args.execute:
            execute(path)
        print(f"wrote {path.relative_to(HERE.parent)} ({path.stat().st_size / 1e3:.0f} kB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())

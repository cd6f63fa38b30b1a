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
        code("""
# rotor coefficients fitted from stand data, the battery and Bryson limits, where given
for item in (*opened.design.rotor_fits, opened.design.battery, opened.design.bryson):
    if item is not None:
        display(item)
"""),
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

cases = [analyse_case(veh, failed, ratio, simulate=True) for failed, ratio in all_cases(veh)]
wb.CasesTable(cases)
"""),
        md("## Static-hover authority and the operating point\nFor each case: whether a "
           "non-spinning hover exists within the thrust limits, its available control authority "
           "(Du, Quan, Cai et al. 2015: the distance from the hover point to the boundary of the "
           "attainable thrust-and-torque set, and along each axis), the operating point the "
           "design's rule (`[control] operating_point`) chose from every candidate "
           "equilibrium, and the runner-up when within 5 % on the rule's objective."),
        code("""
from kit.analysis.equilibrium import OperatingPoints

OperatingPoints(tuple(c.eq for c in cases))
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
        md("## Recovery from every failure, flown, worst first\nHover under height and "
           "position hold over the hover LQR; the rotors fail at 0.5 s; after "
           "`[control] failure_detection_delay_s` a recovery law gain-scheduled on the measured "
           "spin rate takes over (Rugh & Shamma, Automatica 36, 2000), with the design's motor "
           "lag and idle thrust in the plant. Each run lasts six times the longest time "
           "constant (slowest closed-loop pole, spin-up J_zz / gamma_z). Converged means tilt, "
           "body rates, yaw rate, position, height and velocity all settle."),
        code("""
from IPython.display import HTML

from kit.analysis.report import transients_html, worst_first

HTML(transients_html(cases))
"""),
        md("## The worst case in detail, and its gains for the flight controller"),
        code("""
flown = worst_first(cases)
if flown:
    display(flown[0].transient, flown[0].ctl, flown[0].gains)
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
        md("## Recovery from every failure, flown, worst first"),
        code("""
from IPython.display import HTML

HTML(report.transients_html())
"""),
        md("## Gusts: the nonlinear loop against the linear saturation-crossing rate"),
        code("report.gust"),
        md("## Gains for the flight controller\nPer case: K with its state order and units, the "
           "input order (rotor names), the operating point, continuous and discretised at "
           "`[control] loop_rate_hz` (zero-order hold). The same as `rotorbook gains FILE`."),
        code("""
for c in report.cases:
    if c.gains is not None:
        display(c.gains)
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


def compare_nb():
    return [
        md(header(
            "Compare revisions workbook",
            "What changed between two revisions of one design: the inputs field by field (parts "
            "and rotors matched by name), mass properties, every case's operating point, spin "
            "rate, tilt, busiest-rotor margin, control figures and thrust-saturation rate, and "
            "every design check whose verdict changed or whose margin is eroding.",
            "none of its own: both revisions are analysed with the kit's analysis (as in the "
            "other workbooks) and the results are subtracted; relative change "
            "$(x_{new} - x_{old}) / |x_{old}|$; a check's margin is $x - x_{lim}$ for "
            "$\\geq$ and $x_{lim} - x$ for $\\leq$.",
            "as in the hover, rotor-out and momentum-wheel workbooks.",
            "revisions/survey_quad_rev_b.toml")),
        code(PARAMS_NOTE
             + 'DESIGN_PATH = "../data/revisions/survey_quad_rev_b.toml"  # the new revision\n'
             + "# the previous revision: a design file or the output of `rotorbook analyze "
               "--json`\n"
             + 'PREVIOUS_PATH = "../data/designs/survey_quad.toml"', tags=["parameters"]),
        code("""
from pathlib import Path

from IPython.display import Markdown, display

from kit import panels
from kit import workbook as wb
from kit.compare import checks_of, compare, load_revision

new = load_revision(DESIGN_PATH)
if not Path(PREVIOUS_PATH).is_file():
    display(Markdown(f"**PREVIOUS_PATH {PREVIOUS_PATH!r} is not a file**: set it to the "
                     "previous revision of this design. Shown below: this revision against "
                     "itself."))
    old = new
else:
    old = load_revision(PREVIOUS_PATH)
if old.name != new.name:
    display(Markdown(f"**PREVIOUS_PATH is a revision of another design** ({old.name!r}, not "
                     f"{new.name!r}): set it to the previous revision of this design. Shown "
                     "below: this revision against itself."))
    old = new
panels.setup()
"""),
        md("## Verdict and what changed\nChecks that now fail come first; a passing check is "
           "*eroding* when it lost more than the stated fraction of its margin to the limit."),
        code("""
cmp = compare(old, new)
cmp
"""),
        md("## Explore\nPick the quantity to compare across every case, and the case whose "
           "thrusts and closed-loop poles are drawn over each other."),
        code("panels.ComparePanel(cmp)"),
        md("## Design checks of the new revision"),
        code("wb.Checks(checks_of(new))"),
        *CLOSE,
    ]


NOTEBOOKS = {
    "hover.ipynb": hover_nb,
    "rotor_out.ipynb": rotor_out_nb,
    "momentum_wheel.ipynb": wheel_nb,
    "design_review.ipynb": review_nb,
    "compare_revisions.ipynb": compare_nb,
}


def build(name: str) -> nbformat.NotebookNode:
    nb = new_notebook(cells=NOTEBOOKS[name]())
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3 (ipykernel)",
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

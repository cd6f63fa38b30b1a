"""The ``rotorbook`` command: check, equations, analyze, record, new.

Every sub-command is a thin face over the kit's functions. Bad input ends with one line per
problem on stderr and exit status 2; no traceback unless ``--debug`` is given.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import warnings

from kit import BLAS_THREAD_VARS, __version__
from kit.errors import (
    AnalysisError,
    DesignError,
    DesignWarning,
    OptionError,
    RecordError,
    RotorbookError,
    Terminated,
)
from kit.textsafe import terminal_text

# one BLAS thread per process, before numpy is first imported (the imports above load none):
# the kit's matrices are at most a few dozen rows, and threaded BLAS on a busy machine spends
# its time waiting (a 4 x 4 Riccati solve took 13 ms instead of 1.2 ms on 2 loaded cores).
# An explicit setting is kept.
for _var in BLAS_THREAD_VARS:
    os.environ.setdefault(_var, "1")

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_BAD_INPUT = 2
EXIT_WORSE = 3
#: With ``--strict``: the analysis ran and at least one design check failed.
EXIT_CHECKS_FAILED = 3

EXIT_CODES_TEXT = """exit status:
  0  done{ok}
  1  a workbook failed to run (its record is marked FAILED)
  2  invalid input or option (one line per problem on stderr)
  3  with --strict: the analysis ran and a design check failed"""


def _json_safe(obj):
    """Plain JSON data: NaN and infinities become null, numpy values plain Python."""
    if isinstance(obj, dict):
        return {str(k): _json_safe(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_json_safe(v) for v in obj]
    if hasattr(obj, "tolist"):
        return _json_safe(obj.tolist())
    if isinstance(obj, float):
        return obj if obj == obj and obj not in (float("inf"), float("-inf")) else None
    return obj


def _dump_json(data, indent=None) -> None:
    """Write JSON on stdout; never a NaN or Infinity token."""
    json.dump(_json_safe(data), sys.stdout, indent=indent, allow_nan=False)
    sys.stdout.write("\n")


def _load_with_warnings(path: str):
    """Load a design and its mass properties; return (design, massprops, warning lines).

    The warnings are returned as text (shown once by the caller), not emitted.
    """
    from kit import design as design_mod
    from kit import massprops

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DesignWarning)
        d = design_mod.load(path)
    mp = massprops.compute(d)
    return d, mp, list(d.warnings) + list(mp.warnings)


def _fmt_vec(v, digits=4) -> str:
    return "[" + ", ".join(f"{x + 0.0:.{digits}g}" for x in v) + "]"


def check_summary(d, mp) -> str:
    """Short text summary of a valid design (``rotorbook check``)."""
    lines = [
        f"{terminal_text(d.name)} (revision {terminal_text(d.revision)})  sha256 {d.sha256[:12]}",
        f"  mass            {mp.mass_kg:.4g} kg",
        f"  CoM             {_fmt_vec(mp.com_m)} m (design frame)",
        "  inertia about CoM (kg m^2, rotor spin inertia included):",
    ]
    lines += ["    " + _fmt_vec(row, 5) for row in mp.inertia_kg_m2]
    lines.append(f"  principal moments {_fmt_vec(mp.principal_moments_kg_m2, 5)} kg m^2")
    lines.append(f"  rotors ({len(d.rotors)}), hubs about the CoM:")
    for r, pos in zip(d.rotors, mp.rotor_positions_m, strict=True):
        spin = "ccw" if r.spin > 0 else "cw"
        lines.append(f"    {terminal_text(r.name):<14} {_fmt_vec(pos)} m  {spin:<3}  "
                     f"max {r.max_thrust_n:g} N")
    if d.wheel is not None:
        lines.append(
            f"  wheel           h_max {d.wheel.max_momentum_n_m_s:.4g} N m s "
            f"({d.wheel.inertia_kg_m2:g} kg m^2 x {d.wheel.max_speed_rad_s:g} rad/s)"
        )
    lines.append(f"  failure cases   {len(d.failure_cases)} listed; review sets: "
                 f"{d.review.failure_sets}")
    lines += _shorthand_summary(d)
    return "\n".join(lines)


def _shorthand_summary(d) -> list[str]:
    """Lines on fitted rotors, degraded cases, battery and Bryson limits, when given."""
    lines = []
    for f in d.rotor_fits:
        lines.append(f"  stand data      {f.file} (sha256 {f.sha256[:12]}), {f.n_points} points, "
                     f"for {', '.join(f.rotors)}:")
        lines.append(f"    thrust_coeff_n_s2 {f.thrust_coeff_n_s2:.5g} +- "
                     f"{f.thrust_coeff_se_n_s2:.2g} (R^2 {f.thrust_r_squared:.4f}); "
                     f"torque_per_thrust_m {f.torque_per_thrust_m:.5g} +- "
                     f"{f.torque_per_thrust_se_m:.2g} (R^2 {f.torque_r_squared:.4f})")
    for dc in d.degraded_cases:
        lines.append(f"  failure case    {dc.label}")
    if d.degraded_fraction is not None:
        lines.append(f"  review          each rotor degraded to {d.degraded_fraction:g} of max "
                     "thrust")
    if d.battery is not None:
        b = d.battery
        lines.append(f"  battery         {b.nominal_voltage_v:g} V nominal, {b.end_voltage_v:g} V "
                     f"at end of discharge: max thrust x {b.thrust_scale:.4g}")
    if d.bryson is not None:
        w = d.bryson.weights
        lines.append(f"  LQR weights     by Bryson's rule: rate {w['weight_rate']:.4g}, attitude "
                     f"{w['weight_attitude']:.4g}, thrust {w['weight_thrust']:.4g}")
    return lines


def expanded_design_text(path: str) -> str:
    """The design file with its shorthand written out (``rotorbook check --expanded``)."""
    import tomllib
    from pathlib import Path

    from kit.design_expand import expanded_text

    p = Path(path)
    return expanded_text(tomllib.loads(p.read_text(encoding="utf-8")), p.parent,
                         header=f"{path} as read by rotorbook")


def _check_one(path: str) -> tuple[dict, str | None]:
    """Check one design file: its ``--json`` object and, when valid, its text summary."""
    from kit import massprops

    try:
        d, mp, warns = _load_with_warnings(path)
        from kit.analysis.report import finite_mass_properties

        finite_mass_properties(d, mp)
    except DesignError as exc:
        return {"file": path, "design": None, "mass_properties": None, "rotors": [],
                "errors": list(exc.problems), "warnings": [], "rotor_fits": []}, None
    record = {
        "file": path,
        "design": {"name": d.name, "revision": d.revision, "sha256": d.sha256},
        "mass_properties": mp.to_dict(),
        "rotors": massprops.rotor_table(d, mp),
        "errors": [],
        "warnings": warns,
        "rotor_fits": [f.to_dict() for f in d.rotor_fits],
    }
    return record, check_summary(d, mp)


def check_record(path: str) -> dict:
    """The JSON object of ``rotorbook check --json`` for one file."""
    return _check_one(path)[0]


def cmd_check(args) -> int:
    """Validate each file; invalid ones print one line per problem on stderr (exit 2)."""
    checked = [_check_one(p) for p in args.files]
    records = [rec for rec, _ in checked]
    for rec in records:  # every problem on stderr, with --json too
        for line in rec["errors"]:
            print(f"{rec['file']}: {line}", file=sys.stderr)
    if args.json:
        _dump_json(records, indent=2)
    else:
        for rec, summary in checked:
            if rec["errors"]:
                continue
            if getattr(args, "expanded", False):
                print(expanded_design_text(rec["file"]))
                for w in rec["warnings"]:
                    print(f"# warning: {w}")
                continue
            print(f"{rec['file']}: valid")
            print(summary)
            for w in rec["warnings"]:
                print(f"  warning: {w}")
    return EXIT_OK if all(not r["errors"] for r in records) else EXIT_BAD_INPUT


def cmd_equations(args) -> int:
    from kit.design import load
    from kit.symbolic.display import equations_text
    from kit.symbolic.structure import Structure

    d = load(args.file)
    st = Structure(n_rotors=len(d.rotors), wheel=d.wheel is not None, drag_law=d.aero.drag_law)
    print(equations_text(st, latex=args.latex))
    return EXIT_OK


def cmd_analyze(args) -> int:
    from kit.analysis.report import analyze

    d, _mp, warns = _load_with_warnings(args.file)
    for w in warns:
        print(f"{args.file}: warning: {w}", file=sys.stderr)
    report = analyze(d, progress=_progress("cases", not args.json))
    if args.json:
        _dump_json(report.to_dict(), indent=1)
    else:
        print(report.summary_text())
    if args.strict and not report.passed:
        failed = report.verdict["failed"]
        print(f"rotorbook: {failed} design check(s) failed (--strict)", file=sys.stderr)
        return EXIT_CHECKS_FAILED
    return EXIT_OK


def cmd_gains(args) -> int:
    from pathlib import Path

    from kit.analysis.report import gains_document
    from kit.design import load
    from kit.fileio import write_atomic

    doc = gains_document(load(args.file))
    text = json.dumps(doc, indent=1) + "\n"
    if args.out is None:
        sys.stdout.write(text)
        return EXIT_OK
    out = Path(args.out)
    if out.is_dir():
        raise OptionError(f"--out: {str(out)!r} is a folder -> give a file name, e.g. "
                          f"{str(out / 'gains.json')!r}")
    if out.exists() and not args.force:
        raise OptionError(f"--out: {out} exists; pass --force to replace it")
    write_atomic(out, text)
    print(f"gains of {len(doc['cases'])} case(s) written to {out}")
    return EXIT_OK


def _progress(label: str, enabled: bool):
    """A text progress bar on stderr when it is a terminal (nothing in logs and pipes)."""
    if not enabled or not sys.stderr.isatty():
        return None
    from kit.panels.progress import TextProgress

    # the bar redraws with a carriage return: it writes to the stream under the escaping one
    return TextProgress(terminal_text(label), stream=getattr(sys.stderr, "raw_stream",
                                                              sys.stderr))


#: Most grid points per side of ``rotorbook sweep`` (MAX_SWEEP_POINTS^2 points in all).
MAX_SWEEP_POINTS = 101
#: Largest offset span of ``rotorbook sweep``, in m.
MAX_SWEEP_SPAN_M = 10.0


def check_sweep_options(points: int, span_m: float) -> None:
    """Refuse a sweep grid no design review needs, before any work (OptionError, exit 2).

    ``points`` per side: 2 .. :data:`MAX_SWEEP_POINTS`. ``span_m``: finite, > 0 and at most
    :data:`MAX_SWEEP_SPAN_M` m (offsets run from -span to +span).
    """

    if not 2 <= points <= MAX_SWEEP_POINTS:
        raise OptionError(f"--points: {points} -> a whole number from 2 to {MAX_SWEEP_POINTS} "
                          f"(grid points per side; {MAX_SWEEP_POINTS} gives "
                          f"{MAX_SWEEP_POINTS ** 2} points)")
    if not (math.isfinite(span_m) and 0 < span_m <= MAX_SWEEP_SPAN_M):
        raise OptionError(f"--span-m: {span_m!r} -> a finite number of metres, > 0 and at most "
                          f"{MAX_SWEEP_SPAN_M:g} (offsets run from -span to +span)")


def cmd_sweep(args) -> int:
    import numpy as np

    from kit.analysis.report import plain
    from kit.analysis.sweep import placement_sweep
    from kit.design import load

    d = load(args.file)
    names = [p.name for p in d.parts] + (["wheel"] if d.wheel is not None else [])
    if args.part not in names:
        raise OptionError(f"--part: {args.part!r} is not a part of {d.name!r}; choose one "
                             "of: " + ", ".join(names))
    unknown = [f for f in args.failed if f not in d.rotor_names]
    if unknown:
        raise OptionError(f"--failed: {', '.join(unknown)} -> rotor names: "
                             + ", ".join(d.rotor_names))
    check_sweep_options(args.points, args.span_m)
    offsets = np.linspace(-args.span_m, args.span_m, args.points)
    executor = None
    if args.scheduler:
        from kit.analysis.sweep import cluster_executor

        try:
            executor = cluster_executor(args.scheduler)
        except ImportError:
            raise OptionError("--scheduler needs dask.distributed: pip install "
                              "'rotorbook[cluster]'") from None
        except (OSError, TimeoutError, ValueError) as exc:
            raise OptionError(f"--scheduler: no dask scheduler at {args.scheduler!r} ({exc})"
                              "; give its address, e.g. tcp://host:8786") from None
    try:
        pmap = placement_sweep(d, args.part, offsets, offsets, tuple(args.failed),
                               executor=executor,
                               progress=_progress(f"sweep {args.part}", not args.json))
    finally:
        if executor is not None:
            executor.shutdown()
    if args.json:
        _dump_json(plain(pmap.to_dict()))
        return EXIT_OK
    print(f"{terminal_text(d.name)}: {terminal_text(repr(args.part))} moved over "
          f"{args.points} x {args.points} offsets, "
          f"+-{args.span_m:g} m in x and y")
    cases = [("no failure", pmap.hover)]
    if pmap.failure is not None:
        cases.append(("failed: " + ", ".join(pmap.failure.failed), pmap.failure))
    for label, cm in cases:
        s = cm.summary()
        print(f"  {label}:")
        for key, value in s.items():
            if isinstance(value, list):
                value = " .. ".join(f"{v:.4g}" for v in value)
            print(f"    {key:<26} {value}")
    return EXIT_OK


def cmd_record(args) -> int:
    from pathlib import Path

    from kit.record.render import record_design

    if args.template_dir is not None and not Path(args.template_dir).is_dir():
        raise OptionError(f"--template-dir: {args.template_dir!r} is not a folder -> give a "
                          "folder of workbook templates (.ipynb), or leave it out for the kit's")
    previous = None
    if getattr(args, "previous", None):
        from kit.compare import load_revision

        previous = load_revision(args.previous)  # invalid -> exit 2 before anything runs
    result = record_design(args.design, workbooks=args.workbooks, out_dir=args.out,
                           force=args.force, wait=args.wait, template_dir=args.template_dir)
    for line in result.lines():
        print(line)
    if previous is not None and result.ok:
        from kit.compare import compare, load_revision
        from kit.record.compare_page import record_previous

        cmp = compare(previous, load_revision(args.design))
        page = record_previous(cmp, args.out, force=True)
        print(f"comparison with {args.previous}: {cmp.verdict_text()} -> {page}")
    if not result.ok:
        return EXIT_FAILED
    failed = sum(r.checks_failed for r in result.records)
    if args.strict and failed:
        print(f"rotorbook: {failed} design check(s) failed (--strict)", file=sys.stderr)
        return EXIT_CHECKS_FAILED
    return EXIT_OK


def cmd_compare(args) -> int:
    """Compare two revisions; exit 3 when a check turned to fail (strict: or eroded)."""
    from kit.compare import compare, load_revision

    if not (0 < args.erosion <= 1):
        raise OptionError(f"--erosion: {args.erosion!r} -> a fraction in (0, 1], e.g. 0.25")
    old = load_revision(args.old)
    new = load_revision(args.new)
    cmp = compare(old, new, erosion=args.erosion, strict=args.strict)
    if args.json:
        _dump_json(cmp.to_dict(), indent=1)  # never a NaN or Infinity token
    else:
        print(cmp.summary_text())
    if args.html:
        from kit.record.compare_page import write_comparison

        page = write_comparison(cmp, args.html, force=args.force)
        if not args.json:
            print(f"comparison record: {page}")
    return EXIT_WORSE if cmp.worse else EXIT_OK


def cmd_history(args) -> int:
    from kit.record.history import write_history

    result = write_history(args.dir, add=args.add or (), force=args.force)
    for line in result.lines():
        print(line)
    return EXIT_OK


def cmd_new(args) -> int:
    from kit.record.render import new_folder

    folder = new_folder(args.dir, args.design)
    print(f"workbook folder ready: {folder}")
    from kit.record.history import seed

    first = seed(folder)
    if first is not None:
        print(f"revision history started: {first} (add revisions with `rotorbook history "
              f"{args.dir} --add DESIGN`)")
    return EXIT_OK


class OneLineParser(argparse.ArgumentParser):
    """An argument parser whose errors are one line on stderr naming the option and the fix
    (exit 2), never a usage block."""

    def error(self, message: str):
        print(f"{self.prog}: {_option_fix(message, self)}", file=sys.stderr)
        sys.exit(EXIT_BAD_INPUT)

    def parse_args(self, args=None, namespace=None):
        ns, extras = self.parse_known_args(args, namespace)
        if extras:
            command = getattr(ns, "command", None)
            sub = _subparser(self, command)
            shown = " ".join(repr(x) if not x or x.isspace() else x for x in extras)
            (sub or self).error(f"unrecognized arguments: {shown}")
        return ns


def _subparser(parser: argparse.ArgumentParser, name) -> argparse.ArgumentParser | None:
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return action.choices.get(name)
    return None


def _subparser_names(parser: argparse.ArgumentParser) -> list[str]:
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return list(action.choices)
    return []


def _options_of(parser: argparse.ArgumentParser) -> str:
    opts = [a.option_strings[-1] for a in parser._actions
            if a.option_strings and a.dest not in ("help", "version", "debug")]
    return ", ".join(opts) if opts else "none"


def _option_fix(message: str, parser: argparse.ArgumentParser) -> str:
    """An argparse message rewritten as ``what: value -> the fix``."""
    import re

    help_ = f"`{parser.prog} --help` shows the arguments and an example"
    m = re.match(r"argument (\S+?)(?:/\S+)?: invalid (int|float) value: (.*)$", message)
    if m:
        what = "a whole number" if m.group(2) == "int" else "a number"
        return f"{m.group(1)}: {m.group(3)} -> {what}"
    m = re.match(r"argument (\S+?)(?:/\S+)?: invalid choice: (.*?) \(choose from (.*)\)$",
                 message)
    if m:
        return f"{m.group(1)}: {m.group(2)} -> one of {m.group(3)}"
    m = re.match(r"argument (\S+?)(?:/\S+)?: expected (?:one|at least one) argument$", message)
    if m:
        return f"{m.group(1)}: needs a value -> give {m.group(1)} VALUE; {help_}"
    m = re.match(r"argument (\S+?)(?:/\S+)?: ignored explicit argument (.*)$", message)
    if m:
        return f"{m.group(1)}: takes no value ({m.group(2)}) -> write {m.group(1)} alone"
    m = re.match(r"the following arguments are required: (.*)$", message)
    if m and m.group(1) == "COMMAND":
        return "COMMAND: missing -> give one of: " + ", ".join(_subparser_names(parser))
    if m:
        return f"{m.group(1)}: missing -> give {m.group(1)}; {help_}"
    m = re.match(r"unrecognized arguments: (.*)$", message)
    if m:
        top = any(isinstance(a, argparse._SubParsersAction) for a in parser._actions)
        known = ("commands: " + ", ".join(_subparser_names(parser)) if top
                 else "options: " + _options_of(parser))
        return (f"{m.group(1)}: not an argument of `{parser.prog}` -> remove it; its {known} "
                "(--debug and --version go before the command)")
    return f"{message} -> {help_}"


def _command(sub, name: str, help_: str, example: str, ok: str = "") -> argparse.ArgumentParser:
    """A sub-command whose --help ends with an example and the exit codes."""
    return sub.add_parser(name, help=help_, description=help_,
                          formatter_class=argparse.RawDescriptionHelpFormatter,
                          epilog=f"example:\n  {example}\n\n" + EXIT_CODES_TEXT.format(ok=ok))


def build_parser() -> argparse.ArgumentParser:
    p = OneLineParser(
        prog="rotorbook",
        description="Multirotor attitude dynamics: design checks, derivations, analyses, records.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog="example:\n  rotorbook check data/designs/survey_quad.toml\n"
               "  rotorbook analyze data/designs/survey_quad.toml --strict\n\n"
               + EXIT_CODES_TEXT.format(ok=""),
    )
    p.add_argument("--version", action="version", version=f"rotorbook {__version__}")
    p.add_argument("--debug", action="store_true", help="show tracebacks")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    c = _command(sub, "check", "validate design files and summarise mass properties",
                 "rotorbook check data/designs/survey_quad.toml --json",
                 " (every file valid)")
    c.add_argument("files", nargs="+", metavar="FILE")
    c.add_argument("--json", action="store_true", help="JSON list on stdout")
    c.add_argument("--expanded", action="store_true",
                   help="print each valid file with rotor types, rings, stand data and Bryson "
                        "limits written out as plain fields")
    c.set_defaults(func=cmd_check)

    e = _command(sub, "equations", "print the derived equations for a design's structure",
                 "rotorbook equations data/designs/heavy_hex.toml --latex")
    e.add_argument("file", metavar="FILE")
    e.add_argument("--latex", action="store_true", help="LaTeX instead of plain text")
    e.set_defaults(func=cmd_equations)

    a = _command(sub, "analyze", "hover, failure cases, control, risk, wheel, checks",
                 "rotorbook analyze data/designs/survey_quad.toml --json --strict > analysis.json",
                 " (without --strict also when design checks fail; see the verdict)")
    a.add_argument("file", metavar="FILE")
    a.add_argument("--json", action="store_true", help="JSON (schema rotorbook.analysis/1)")
    a.add_argument("--strict", action="store_true",
                   help="exit 3 when any design check fails (a gate for CI)")
    a.set_defaults(func=cmd_analyze)

    s = _command(sub, "sweep", "move one part over a grid: equilibria, control, risk",
                 "rotorbook sweep data/designs/survey_quad.toml --part battery --failed front_left")
    s.add_argument("file", metavar="FILE")
    s.add_argument("--part", required=True, help="part name (or 'wheel')")
    s.add_argument("--failed", nargs="*", default=[], metavar="ROTOR",
                   help="failure set to map beside the no-failure case")
    s.add_argument("--points", type=int, default=11, help="grid points per side (default 11)")
    s.add_argument("--span-m", type=float, default=0.03,
                   help="offsets from -span to +span in x and y, in m (default 0.03)")
    s.add_argument("--json", action="store_true", help="the whole map as JSON")
    s.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="run on the dask.distributed scheduler at ADDRESS (tcp://host:8786; "
                        "needs the 'cluster' extra) instead of a local process pool")
    s.set_defaults(func=cmd_sweep)

    r = _command(sub, "record", "execute the workbooks for a design into HTML records",
                 "rotorbook record data/designs/survey_quad.toml --out records/quad --strict",
                 " (every workbook ran; without --strict also when design checks fail)")
    r.add_argument("design", metavar="DESIGN")
    r.add_argument("--workbooks", nargs="+", default=None, metavar="NAME",
                   help="workbook names (default: all templates)")
    r.add_argument("--out", default="records", metavar="DIR", help="output folder")
    r.add_argument("--force", action="store_true",
                   help="replace existing records, or a folder of another design's records")
    r.add_argument("--wait", action="store_true",
                   help="wait for another run writing into the same folder instead of "
                        "stopping (exit 2)")
    r.add_argument("--previous", default=None, metavar="OLD",
                   help="the previous revision (design file or analyze --json output): adds "
                        "the comparison page to the index")
    r.add_argument("--strict", action="store_true",
                   help="exit 3 when every workbook ran and a design check failed")
    r.add_argument("--template-dir", default=None, metavar="DIR",
                   help="folder of workbook templates (default: workbooks/ beside the kit)")
    r.set_defaults(func=cmd_record)

    cp = _command(sub, "compare", "two revisions side by side: inputs, results, checks "
                  "(exit 3: a check turned to fail, or with --strict a margin eroded past "
                  "--erosion)",
                  "rotorbook compare data/designs/survey_quad.toml "
                  "data/revisions/survey_quad_rev_b.toml",
                  " (nothing got worse)")
    cp.add_argument("old", metavar="OLD")
    cp.add_argument("new", metavar="NEW")
    cp.add_argument("--json", action="store_true", help="JSON (schema rotorbook.comparison/1)")
    cp.add_argument("--strict", action="store_true",
                    help="an eroding check counts as worse (exit 3)")
    cp.add_argument("--erosion", type=float, default=0.25, metavar="F",
                    help="fraction of a passing check's margin it may lose before it is "
                         "listed as eroding (default 0.25)")
    cp.add_argument("--html", default=None, metavar="FILE",
                    help="also write the comparison record (self-contained HTML)")
    cp.add_argument("--force", action="store_true", help="replace an existing --html file")
    cp.set_defaults(func=cmd_compare)

    hi = _command(sub, "history", "revisions of a design folder: verdicts, comparisons",
                  "rotorbook history my_quad --add my_quad_rev_c.toml")
    hi.add_argument("dir", metavar="DIR", help="a folder made by `rotorbook new`")
    hi.add_argument("--add", nargs="+", default=None, metavar="DESIGN",
                    help="design files to add, in order, as the next revisions")
    hi.add_argument("--force", action="store_true",
                    help="add a revision even when the design name differs")
    hi.set_defaults(func=cmd_history)
    g = _command(sub, "gains", "LQR gains of every case for the flight controller (JSON)",
                 "rotorbook gains data/designs/survey_quad.toml --out gains.json")
    g.add_argument("file", metavar="FILE")
    g.add_argument("--out", default=None, metavar="FILE", help="output file (default: stdout)")
    g.add_argument("--force", action="store_true", help="replace an existing output file")
    g.set_defaults(func=cmd_gains)

    n = _command(sub, "new", "a per-design folder with the workbooks pointed at it",
                 "rotorbook new my_quad --from data/designs/survey_quad.toml")
    n.add_argument("dir", metavar="DIR")
    n.add_argument("--from", dest="design", required=True, metavar="DESIGN")
    n.set_defaults(func=cmd_new)
    return p


class _TerminalStream:
    """A text stream that escapes control characters (:func:`kit.textsafe.terminal_text`)
    in everything written to it, line feeds apart."""

    def __init__(self, stream):
        self.raw_stream = stream

    def write(self, text: str) -> int:
        self.raw_stream.write(terminal_text(text, keep_newlines=True))
        return len(text)

    def __getattr__(self, name):
        return getattr(self.raw_stream, name)


def main(argv: list[str] | None = None) -> int:
    out, err = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = _TerminalStream(out), _TerminalStream(err)
    try:
        return _main(argv)
    finally:
        sys.stdout, sys.stderr = out, err


def _main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except DesignError as exc:
        if args.debug:
            raise
        where = exc.path or "design"
        for line in exc.problems:
            print(f"{where}: {line}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except (RecordError, RotorbookError) as exc:
        if args.debug:
            raise
        print(f"rotorbook: {exc}", file=sys.stderr)
        bad_input = isinstance(exc, RecordError | OptionError | AnalysisError)
        return EXIT_BAD_INPUT if bad_input else EXIT_FAILED
    except BrokenPipeError:  # pragma: no cover - output piped into head and the like
        return EXIT_OK
    except OSError as exc:  # a file that cannot be read or written (path, permission, space)
        if args.debug:
            raise
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"rotorbook: {where}{exc.strerror or exc} -> check the path, its permissions "
              "and the free space", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:  # pragma: no cover
        print("rotorbook: interrupted", file=sys.stderr)
        return 130
    except Terminated:
        print("rotorbook: stopped by SIGTERM; nothing half written was left behind",
              file=sys.stderr)
        return 143


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

"""Mutated design files for the fuzz tests (``tests/test_fuzz.py``) and the long fuzz run
(``tests/bench/fuzz_designs.py``, ``make fuzz``).

A case starts from one of the demo designs in ``data/designs/`` and applies a few mutations:
a field deleted, its type swapped, its magnitude pushed to an extreme (0, negative, 1e-300,
1e300, an integer beyond the float range, NaN, infinities), a string replaced by unicode
text (control characters, right-to-left marks, markup, emoji), or an array entry copied. The
mutated document is written as TOML text and run through the command line's own entry point
(``rotorbook check --json`` and, for a file that loads, ``rotorbook analyze --json``). An
outcome is good when the command answers with a result or with the kit's own error (exit 2 and
a line on stderr), its JSON parses without NaN or Infinity tokens, and nothing else escapes.

The choices come from a :class:`Chooser`, so the same mutations run under hypothesis (which
shrinks a failing case) and under a seeded :class:`random.Random` (the long run).
"""

from __future__ import annotations

import contextlib
import copy
import hashlib
import io
import json
import math
import random
import re
import signal
import tomllib
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from kit.design_expand import _toml_str, toml_value

ROOT = Path(__file__).resolve().parents[1]
DEMO_DESIGNS = sorted((ROOT / "data" / "designs").glob("*.toml"))

#: Text that a mutation may put into a string field (common practice, no source: the usual
#: suspects of text handling).
NASTY_TEXT = (
    "", " ", "\u202eevil\u202c", "<script>alert(1)</script>", "a\u0000b", "\x1b[2J\x1b]0;t\x07",
    "\u00e9\u0301", "\U0001f681" * 20, "x" * 5000, "front_left", "rear_right", "\t\n\r",
    "\ufeff", "\u0627\u0644\u0639\u0631\u0628\u064a\u0629", "0123456789abcdef0123456789abcdef",
    "'\"\\", "ccw", "cw", "box", "tube", "quadratic", "pairs", "single+pairs",
)
#: Magnitudes a mutation may give to a number.
EXTREMES = (
    0, 0.0, -0.0, -1, 1, 2, -1e-300, 1e-300, 5e-324, 1e-12, 1e12, 1e154, 1e300, -1e300,
    10**19, 10**400, -(10**400), math.nan, math.inf, -math.inf, 3, 1000, 3000,
)
KINDS = ("delete", "retype", "magnitude", "scale", "unicode", "copy_entry", "drop_entry")


class Chooser:
    """Random choices: ``integer(lo, hi)`` (both included) and ``pick(seq)``."""

    def integer(self, lo: int, hi: int) -> int:  # pragma: no cover - interface
        raise NotImplementedError

    def pick(self, seq: Sequence[Any]) -> Any:
        return seq[self.integer(0, len(seq) - 1)]


class RandomChooser(Chooser):
    """Choices from a seeded :class:`random.Random`."""

    def __init__(self, seed: int) -> None:
        self.rng = random.Random(seed)

    def integer(self, lo: int, hi: int) -> int:
        return self.rng.randint(lo, hi)


class DrawChooser(Chooser):
    """Choices drawn from hypothesis' ``st.data()`` object (so failures shrink)."""

    def __init__(self, data) -> None:
        from hypothesis import strategies as st

        self._data = data
        self._st = st

    def integer(self, lo: int, hi: int) -> int:
        return self._data.draw(self._st.integers(lo, hi))


def demo_documents() -> list[dict]:
    """The demo designs, parsed."""
    return [tomllib.loads(p.read_text(encoding="utf-8")) for p in DEMO_DESIGNS]


def _paths(doc: Any, prefix: tuple = ()) -> list[tuple]:
    """Every path (tuple of keys and indices) into the document, the root excluded."""
    out = []
    if isinstance(doc, dict):
        items = list(doc.items())
    elif isinstance(doc, list):
        items = list(enumerate(doc))
    else:
        return out
    for k, v in items:
        out.append(prefix + (k,))
        out += _paths(v, prefix + (k,))
    return out


def _parent(doc: Any, path: tuple) -> Any:
    for k in path[:-1]:
        doc = doc[k]
    return doc


def _other_type(value: Any, ch: Chooser) -> Any:
    options = ["text", 1, 2.5, True, [1.0, 2.0, 3.0], {"a": 1}, [], {}, [[1, 2], [3]],
               "1.5 kg", [value] if not isinstance(value, list) else value[:1]]
    return ch.pick(options)


def _scaled(x, exponent: int) -> float:
    """``x * 10**exponent`` as a float, infinite when it leaves the float range."""
    try:
        return float(x) * 10.0 ** exponent
    except OverflowError:
        return math.copysign(math.inf, x)


def mutate_once(doc: dict, ch: Chooser) -> str:
    """Apply one mutation to ``doc`` in place; return its kind."""
    paths = _paths(doc)
    if not paths:
        return "none"
    path = ch.pick(paths)
    parent = _parent(doc, path)
    key = path[-1]
    value = parent[key]
    kind = ch.pick(KINDS)
    if kind == "delete":
        del parent[key]
    elif kind == "retype":
        parent[key] = _other_type(value, ch)
    elif kind == "magnitude":
        parent[key] = ch.pick(EXTREMES)
    elif kind == "scale":
        if isinstance(value, int | float) and not isinstance(value, bool):
            parent[key] = _scaled(value, ch.integer(-300, 300))
        elif isinstance(value, list) and value and all(isinstance(v, int | float)
                                                        for v in value):
            e = ch.integer(-200, 200)
            parent[key] = [_scaled(v, e) for v in value]
        else:
            parent[key] = ch.pick(EXTREMES)
    elif kind == "unicode":
        parent[key] = ch.pick(NASTY_TEXT)
    elif kind == "copy_entry":
        if isinstance(value, list) and value:
            times = ch.pick((1, 2, 10, 60))
            value.extend(copy.deepcopy(value[-1]) for _ in range(times))
        elif isinstance(parent, list):
            parent.append(copy.deepcopy(value))
        else:
            parent[key] = [value, copy.deepcopy(value)]
    elif kind == "drop_entry":
        if isinstance(value, list) and value:
            value.pop(ch.integer(0, len(value) - 1))
        else:
            del parent[key]
    return kind


def mutated(ch: Chooser, docs: Sequence[dict] | None = None, max_ops: int = 3) -> tuple[dict,
                                                                                         list]:
    """A demo design with 1..max_ops mutations, and the kinds applied."""
    docs = docs if docs is not None else demo_documents()
    doc = copy.deepcopy(ch.pick(docs))
    kinds = [mutate_once(doc, ch) for _ in range(ch.integer(1, max_ops))]
    return doc, kinds


# -- TOML text ------------------------------------------------------------------------------------


def to_toml(doc: dict) -> str:
    """The document as TOML text (top-level keys, values inline)."""
    return "\n".join(f"{_toml_str(str(k))} = {toml_value(v)}" for k, v in doc.items()) + "\n"


# -- running a case -------------------------------------------------------------------------------


class Hang(BaseException):
    """A case ran past its time limit (BaseException: the kit's handlers must not catch it)."""


@contextlib.contextmanager
def time_limit(seconds: float):
    """Raise :class:`Hang` after ``seconds`` of wall time (main thread, POSIX only)."""
    if seconds <= 0 or not hasattr(signal, "setitimer"):
        yield
        return

    def _alarm(signum, frame):
        raise Hang(f"over {seconds:g} s")

    old = signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def _reject_constant(name: str):
    raise ValueError(f"JSON holds the non-standard token {name}")


def strict_json(text: str) -> Any:
    """Parse JSON, refusing NaN, Infinity and -Infinity."""
    return json.loads(text, parse_constant=_reject_constant)


@dataclass
class Outcome:
    """What one command did with one input: ``kind`` is 'ok', 'rejected' (exit 2, each line on
    stderr naming the field and the fix), or a problem (see :func:`judge_any`)."""

    command: str
    kind: str
    detail: str = ""

    @property
    def good(self) -> bool:
        return self.kind in ("ok", "rejected")


def run_command(argv: list[str], time_limit_s: float = 0.0) -> tuple[int | None, str, str, str]:
    """Run ``rotorbook <argv>`` in this process: (exit status, stdout, stderr, problem)."""
    from kit.cli import main

    out, err = io.StringIO(), io.StringIO()
    problem = ""
    code: int | None = None
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), \
                warnings.catch_warnings(), time_limit(time_limit_s):
            # a warning that escapes to stderr is counted, not raised (pytest makes them errors)
            warnings.simplefilter("default")
            warnings.showwarning = _show_warning(err)
            code = main(argv)
    except Hang as exc:
        problem = f"hang: {exc}"
    except SystemExit as exc:  # argparse
        code = exc.code if isinstance(exc.code, int) else 2
    except Exception as exc:  # noqa: BLE001 - exactly what the fuzzer looks for
        problem = f"exception:{type(exc).__name__}: {str(exc)[:200]}"
    return code, out.getvalue(), err.getvalue(), problem


def _show_warning(err):
    def show(message, category, filename, lineno, file=None, line=None):
        err.write(f"PYTHON-WARNING {category.__name__}: {message}\n")
    return show


def judge(command: str, code, stdout: str, stderr: str, problem: str,
          as_json: bool) -> Outcome:
    """Classify one command's answer (:func:`judge_any`; ``analyze`` may exit 3)."""
    ok = (0, 3) if command == "analyze" else (0,)
    return judge_any(command, (), code, stdout, stderr, problem, as_json, ok)


def run_case(doc: dict, folder: Path, analysis: bool = True, time_limit_s: float = 0.0,
             name: str = "case.toml") -> list[Outcome]:
    """Write ``doc`` as a design file in ``folder``, run check (and analyze when the file
    loads); return the outcomes."""
    path = folder / name
    path.write_text(to_toml(doc), encoding="utf-8", errors="surrogatepass")
    if not (folder / STAND_NAME).exists():  # the demo hexacopter's stand data, beside it
        (folder / STAND_NAME).write_bytes(STAND_CSV.read_bytes())
    outcomes = []
    code, so, se, prob = run_command(["check", "--json", str(path)], time_limit_s)
    outcomes.append(judge("check", code, so, se, prob, True))
    if analysis and code == 0 and not prob:
        code, so, se, prob = run_command(["analyze", "--json", str(path)], time_limit_s)
        outcomes.append(judge("analyze", code, so, se, prob, True))
    return outcomes


def edge_mutation(doc: dict, ch: Chooser) -> str:
    """Set one bounded number (README, Limits) to the edge of its allowed range, in place: a
    file that still loads, with a figure as extreme as validation lets through."""
    from kit.design_rules import BOUNDS

    paths = [p for p in _paths(doc) if any(isinstance(k, str) and k in BOUNDS for k in p)]
    leaves = [p for p in paths if isinstance(_parent(doc, p)[p[-1]], int | float)
              and not isinstance(_parent(doc, p)[p[-1]], bool)]
    if not leaves:
        return "none"
    path = ch.pick(leaves)
    field = next(k for k in reversed(path) if isinstance(k, str) and k in BOUNDS)
    lo, hi, _unit = BOUNDS[field]
    parent = _parent(doc, path)
    old = parent[path[-1]]
    edge = ch.pick([x for x in (lo, hi) if x > 0] or [hi])
    parent[path[-1]] = -edge if old < 0 else edge
    return f"edge:{field}={parent[path[-1]]:g}"


# -- the newer commands and inputs ----------------------------------------------------------------
#
# Outcome kinds of :func:`judge_any` (one classification for every command): 'ok' (exit 0, or 1/3
# where the command gives them for a result: a failed workbook, a check that failed or got
# worse); 'rejected' (exit 2, every stderr line one self-contained message: a prefix naming the
# file, the design or rotorbook, then the field and the fix); and the problems: 'traceback'
# (an exception escaped; its type follows), 'multi-line' (exit 2 with a usage block or a message
# broken over lines), 'unclear' (exit 2 with a line that names no fix), 'silent-exit-2', 'hang',
# 'bad-json', 'warning', 'exit-<n>'.

#: The sub-commands of ``rotorbook`` (outcomes are counted per command).
COMMANDS = ("check", "equations", "analyze", "sweep", "record", "compare", "history", "gains",
            "new")
STAND_NAME = "heavy_hex_stand.csv"
STAND_CSV = ROOT / "data" / "designs" / STAND_NAME
STAND_DESIGN = ROOT / "data" / "designs" / "heavy_hex.toml"
#: The words of a message that says what to do (a fix), besides the kit's ``->``.
FIX_WORDS = ("->", "expected", "choose", "give ", "pass ", "use ", "did you mean", "one of",
             "at least", "at most", "a number", "allowed", "needs ", "must ", "remove",
             "rename", "add ", "check ", "save ")
#: Where a line of a good error may start: ``<file>: ``, ``design: ``, ``rotorbook: ``.
_GOOD_PREFIX = ("rotorbook: ", "design: ")
#: ... or a file the command read (a revision in a design folder, a stand file).
_FILE_PREFIX = re.compile(r"^/?[^:\n]*\.(toml|json|csv|ipynb|html): \S")


def _problem_line_ok(line: str, files: Sequence[str]) -> bool:
    """A stderr line that stands alone: a known prefix and a message after it."""
    return bool(line.startswith(_GOOD_PREFIX) or re.match(r"rotorbook \w+: ", line)
                or _FILE_PREFIX.match(line)
                or any(f and line.startswith(f"{f}: ") for f in files))


def judge_any(command: str, argv: Sequence[str], code, stdout: str, stderr: str, problem: str,
              as_json: bool = False, ok_codes: Sequence[int] = (0,)) -> Outcome:
    """Classify one command's answer (kinds above)."""
    if problem.startswith("hang"):
        return Outcome(command, "hang", problem)
    if problem:
        return Outcome(command, "traceback:" + problem.split(":")[1], problem)
    if as_json and code in ok_codes and stdout.strip():
        try:
            strict_json(stdout)
        except ValueError as exc:
            return Outcome(command, "bad-json", str(exc)[:200])
    if "PYTHON-WARNING" in stderr:
        line = next(x for x in stderr.splitlines() if "PYTHON-WARNING" in x)
        return Outcome(command, "warning", line[:200])
    if code in ok_codes:
        return Outcome(command, "ok")
    if code == 2:
        lines = [x for x in stderr.splitlines() if x.strip()]
        if not lines:
            return Outcome(command, "silent-exit-2")
        files = [a for a in argv if not a.startswith("-")] + [str(Path(a)) for a in argv]
        loose = [x for x in lines if not _problem_line_ok(x, files)]
        if loose:
            return Outcome(command, "multi-line", " | ".join(lines[:3])[:300])
        vague = [x for x in lines if not any(w in x.lower() for w in FIX_WORDS)]
        if vague:
            return Outcome(command, "unclear", vague[0][:300])
        return Outcome(command, "rejected", lines[0][:300])
    return Outcome(command, f"exit-{code}", stderr.strip()[:200])


def run_argv(argv: list[str], time_limit_s: float = 0.0, as_json: bool | None = None,
             ok_codes: Sequence[int] = (0,)) -> Outcome:
    """Run ``rotorbook <argv>`` in this process and classify it with :func:`judge_any`."""
    code, so, se, prob = run_command(list(argv), time_limit_s)
    command = argv[0] if argv and argv[0] in COMMANDS else "(top level)"
    as_json = "--json" in argv if as_json is None else as_json
    return judge_any(command, argv, code, so, se, prob, as_json, ok_codes)


# stand data ---------------------------------------------------------------------------------------

STAND_KINDS = (
    "drop_column", "rename_column", "nan", "inf", "negative_thrust", "negative_torque",
    "zero_speed", "shuffle", "few_points", "huge", "bom", "utf16", "latin1", "rpm_units",
    "gram_units", "unit_text", "semicolons", "extra_column", "duplicate_column", "empty",
    "header_only", "text_value", "crlf", "zero_thrust", "zero_torque", "same_speed", "tiny",
    "enormous", "garbage", "nul", "ragged", "blank_and_comments", "reverse", "one_column",
    "quoted", "spaces", "exponent_overflow",
)


def stand_rows() -> tuple[list[str], list[str], list[list[str]]]:
    """The demo stand file as (comment lines, header, data rows)."""
    lines = STAND_CSV.read_text(encoding="utf-8").splitlines()
    comments = [x for x in lines if x.startswith("#")]
    body = [x for x in lines if x.strip() and not x.startswith("#")]
    return comments, body[0].split(","), [r.split(",") for r in body[1:]]


def mutate_stand(ch: Chooser) -> tuple[bytes, list[str]]:
    """The demo stand file with one to three mutations: (bytes, kinds)."""
    comments, header, rows = stand_rows()
    kinds = [ch.pick(STAND_KINDS) for _ in range(ch.integer(1, 3))]
    encoding, prefix, newline, tail = "utf-8", b"", "\n", b""
    for kind in kinds:
        col = ch.integer(0, max(len(header) - 1, 0))
        row = ch.integer(0, max(len(rows) - 1, 0))
        if kind == "drop_column" and len(header) > 1:
            header.pop(col)
            rows = [r[:col] + r[col + 1:] for r in rows]
        elif kind == "rename_column" and header:
            header[col] = ch.pick(("speed_rpm", "Thrust (N)", "thrust_g", "", "torque", "x"))
        elif kind in ("nan", "inf", "text_value", "exponent_overflow") and rows and \
                col < len(rows[row]):
            rows[row][col] = {"nan": ch.pick(("nan", "NaN", "")),
                              "inf": ch.pick(("inf", "-inf", "Infinity")),
                              "text_value": ch.pick(("n/a", "1,5", "--", "0x10", "1e")),
                              "exponent_overflow": ch.pick(("1e999", "-1e400"))}[kind]
        elif kind in ("negative_thrust", "negative_torque", "zero_speed") and rows:
            name = {"negative_thrust": "thrust_n", "negative_torque": "torque_n_m",
                    "zero_speed": "speed_rad_s"}[kind]
            if name in header:
                j = header.index(name)
                if j < len(rows[row]):
                    rows[row][j] = "0" if kind == "zero_speed" else "-" + rows[row][j].lstrip("-")
        elif kind in ("shuffle", "reverse"):
            if kind == "reverse":
                rows.reverse()
            else:
                rows = [rows[ch.integer(0, len(rows) - 1)] for _ in rows] if rows else rows
        elif kind == "few_points":
            rows = rows[:ch.integer(0, 3)]
        elif kind == "huge":
            rows = (rows * ch.pick((50, 2000, 20000)))[:40000]
        elif kind == "bom":
            prefix = "\ufeff".encode()
        elif kind == "utf16":
            encoding = "utf-16"
        elif kind == "latin1":
            encoding = "latin-1"
            comments = comments + ["# r\u00e9sultats mesur\u00e9s \u00b5"]
        elif kind in ("rpm_units", "gram_units", "tiny", "enormous"):
            name = "thrust_n" if kind == "gram_units" else "speed_rad_s"
            factor = {"rpm_units": 60 / (2 * math.pi), "gram_units": 1000 / 9.80665,
                      "tiny": 1e-160, "enormous": 1e160}[kind]
            targets = [name] if kind in ("rpm_units", "gram_units") else header
            for t in targets:
                if t in header:
                    j = header.index(t)
                    for r in rows:
                        with contextlib.suppress(ValueError, IndexError):
                            r[j] = repr(float(r[j]) * factor)
        elif kind == "unit_text" and rows and col < len(rows[row]):
            rows[row][col] = rows[row][col] + ch.pick((" rad/s", " N", "N", " kg"))
        elif kind == "semicolons":
            header = [";".join(header)]
            rows = [[";".join(r)] for r in rows]
        elif kind == "extra_column":
            header.append(ch.pick(("temperature_c", "voltage_v", "note")))
            rows = [r + ["1.0"] for r in rows]
        elif kind == "duplicate_column" and header:
            header.append(header[col])
            rows = [r + [r[col] if col < len(r) else "1"] for r in rows]
        elif kind == "empty":
            header, rows, comments = [], [], []
        elif kind == "header_only":
            rows = []
        elif kind == "crlf":
            newline = "\r\n"
        elif kind in ("zero_thrust", "zero_torque", "same_speed"):
            name = {"zero_thrust": "thrust_n", "zero_torque": "torque_n_m",
                    "same_speed": "speed_rad_s"}[kind]
            if name in header:
                j = header.index(name)
                for r in rows:
                    if j < len(r):
                        r[j] = "100.0" if kind == "same_speed" else "0"
        elif kind == "garbage":
            tail = bytes(ch.integer(0, 255) for _ in range(ch.integer(1, 64)))
        elif kind == "nul":
            tail = b"\x00\x00"
        elif kind == "ragged" and rows:
            rows[row] = rows[row][:ch.integer(0, len(rows[row]))]
        elif kind == "blank_and_comments":
            rows = [r for k, r in enumerate(rows) if k % 2] + [["#", "x"]]
        elif kind == "one_column":
            header = header[:1]
            rows = [r[:1] for r in rows]
        elif kind == "quoted":
            header = [f'"{h}"' for h in header]
            rows = [[f'"{v}"' for v in r] for r in rows]
        elif kind == "spaces":
            header = [f" {h} " for h in header]
            rows = [[f"  {v}\t" for v in r] for r in rows]
    lines = comments + ([",".join(header)] if header else []) + [",".join(r) for r in rows]
    text = newline.join(lines) + (newline if lines else "")
    try:
        data = text.encode(encoding)
    except UnicodeEncodeError:
        data = text.encode("utf-8")
    return prefix + data + tail, kinds


def run_stand_case(data: bytes, folder: Path, time_limit_s: float = 0.0,
                   doc: dict | None = None) -> list[Outcome]:
    """The demo hexacopter (or ``doc``) beside stand file ``data``: ``check --json`` and
    ``check --expanded``."""
    (folder / STAND_NAME).write_bytes(data)
    path = folder / "hex.toml"
    if doc is None:
        path.write_bytes(STAND_DESIGN.read_bytes())
    else:
        path.write_text(to_toml(doc), encoding="utf-8", errors="surrogatepass")
    return [run_argv(["check", "--json", str(path)], time_limit_s),
            run_argv(["check", "--expanded", str(path)], time_limit_s)]


# rings, rotor types and the other shorthand -------------------------------------------------------

#: The sections of the shorthand (kit.design_expand).
SHORTHAND = ("rotor_type", "rotor_ring", "arm_ring", "battery", "control", "failure_case",
             "review")


def shorthand_documents() -> list[dict]:
    """Demo designs that use every shorthand: the hexacopter as it is (rotor type with stand
    data, rotor ring, arm ring) and with a battery, Bryson limits and degraded cases added,
    and the survey quad with a battery, Bryson limits and a degraded case."""
    docs = {p.stem: d for p, d in zip(DEMO_DESIGNS, demo_documents(), strict=True)}
    hex_doc = docs["heavy_hex"]
    more = copy.deepcopy(hex_doc)
    more["battery"] = {"nominal_voltage_v": 22.2, "end_voltage_v": 19.8}
    more["control"] = {k: v for k, v in more["control"].items() if not k.startswith("weight_")}
    more["control"].update(max_rate_rad_s=2.0, max_tilt_deg=15.0, max_thrust_deviation_n=5.0)
    more["failure_case"].append({"failed": ["m2"], "degraded": {"m3": 0.5}})
    more["review"]["degraded_fraction"] = 0.5
    quad = copy.deepcopy(docs["survey_quad"])
    quad["battery"] = {"nominal_voltage_v": 14.8, "end_voltage_v": 13.2}
    first = quad["rotor"][0]["name"]
    second = quad["rotor"][1]["name"]
    quad.setdefault("failure_case", []).append({"failed": [first], "degraded": {second: 0.3}})
    return [hex_doc, more, quad]


def mutated_shorthand(ch: Chooser, docs: Sequence[dict] | None = None,
                      max_ops: int = 3) -> tuple[dict, list]:
    """A shorthand document with 1..max_ops mutations inside its shorthand sections."""
    docs = docs if docs is not None else shorthand_documents()
    doc = copy.deepcopy(ch.pick(docs))
    kinds = []
    for _ in range(ch.integer(1, max_ops)):
        paths = [p for p in _paths(doc) if p[0] in SHORTHAND]
        if not paths:
            break
        sub = {"_": None}
        path = ch.pick(paths)
        # mutate the chosen subtree through a one-key wrapper so mutate_once can replace it
        parent = _parent(doc, path)
        sub["_"] = parent[path[-1]]
        kind = mutate_once(sub, ch) if ch.integer(0, 3) else "delete"
        if "_" in sub:
            parent[path[-1]] = sub["_"]
        else:
            del parent[path[-1]]
        kinds.append(f"{path[0]}:{kind}")
    return doc, kinds


def run_shorthand_case(doc: dict, folder: Path, time_limit_s: float = 0.0) -> list[Outcome]:
    """``check --json`` and ``check --expanded`` of a shorthand document (stand file beside)."""
    return run_stand_case(STAND_CSV.read_bytes(), folder, time_limit_s, doc=doc)


# compare --------------------------------------------------------------------------------------

_ANALYSES: dict[str, dict] = {}


def demo_analysis(name: str = "survey_quad") -> dict:
    """``analyze(...).to_dict()`` of a demo design (or ``data/revisions/<name>``), computed once
    per process."""
    if name not in _ANALYSES:
        from kit import design as design_mod
        from kit.analysis.report import analyze

        path = ROOT / "data" / "designs" / f"{name}.toml"
        if not path.exists():
            path = ROOT / "data" / "revisions" / f"{name}.toml"
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _ANALYSES[name] = json.loads(json.dumps(
                analyze(design_mod.load(path)).to_dict(), allow_nan=True))
    return copy.deepcopy(_ANALYSES[name])


#: Analyses a comparison may start from (the survey quad, its revision B, the wheel quad).
COMPARE_BASES = ("survey_quad", "survey_quad_rev_b", "wheel_quad")
PAIR_KINDS = ("mutate_old", "mutate_new", "mutate_both", "revision_mismatch", "other_design",
              "drop_cases", "drop_checks", "rename_case", "extra_rotor_row", "same")


def compare_pair(ch: Chooser, bases: Sequence[str] = COMPARE_BASES) -> tuple[dict, dict, list]:
    """Two ``analyze --json`` documents to compare, and the kinds of change between them."""
    old = demo_analysis(ch.pick(bases))
    new = demo_analysis(ch.pick(bases))
    kinds = [ch.pick(PAIR_KINDS) for _ in range(ch.integer(1, 2))]
    for kind in kinds:
        if kind in ("mutate_old", "mutate_both"):
            mutate_once(old, ch)
        if kind in ("mutate_new", "mutate_both"):
            mutate_once(new, ch)
        if kind == "revision_mismatch":
            design = new.get("design")
            if isinstance(design, dict):
                design["revision"] = ch.pick(NASTY_TEXT)
                design["name"] = ch.pick(NASTY_TEXT)
        elif kind == "other_design":
            new = demo_analysis(ch.pick(bases))
            if isinstance(new.get("rotors"), list) and new["rotors"]:
                del new["rotors"][ch.integer(0, len(new["rotors"]) - 1)]
        elif kind == "drop_cases" and isinstance(new.get("cases"), list) and new["cases"]:
            del new["cases"][ch.integer(0, len(new["cases"]) - 1):]
        elif kind == "drop_checks" and isinstance(old.get("checks"), list):
            old["checks"] = old["checks"][::2]
        elif kind == "rename_case" and isinstance(new.get("cases"), list) and new["cases"]:
            case = new["cases"][ch.integer(0, len(new["cases"]) - 1)]
            if isinstance(case, dict):
                key = ch.pick(sorted(case) or ["label"])
                case[key] = ch.pick(NASTY_TEXT + EXTREMES)
        elif kind == "extra_rotor_row":
            for v in list(new.values()):
                if isinstance(v, list) and v and isinstance(v[-1], dict):
                    v.append(copy.deepcopy(v[-1]))
                    break
    return old, new, kinds


def _json_text(doc: Any) -> str:
    return json.dumps(doc, indent=1, allow_nan=True)


def run_compare_case(old: dict | str, new: dict | str, folder: Path, time_limit_s: float = 0.0,
                     html: bool = True) -> list[Outcome]:
    """``compare --json`` of two analysis documents (or texts), then the text form with the
    comparison record written."""
    paths = []
    for tag, doc in (("old", old), ("new", new)):
        p = folder / f"{tag}.json"
        p.write_text(doc if isinstance(doc, str) else _json_text(doc), encoding="utf-8",
                     errors="surrogatepass")
        paths.append(str(p))
    out = [run_argv(["compare", "--json", *paths], time_limit_s, ok_codes=(0, 3))]
    if html:
        page = folder / "cmp.html"
        out.append(run_argv(["compare", *paths, "--html", str(page), "--force"], time_limit_s,
                            ok_codes=(0, 3)))
    return out


# history ----------------------------------------------------------------------------------------


def history_folder(folder: Path, base: str = "survey_quad") -> Path:
    """A design folder with one revision whose analysis is cached (no workbooks: ``history``
    needs only the design file and ``revisions/``)."""
    import kit

    src = ROOT / "data" / "designs" / f"{base}.toml"
    d = folder / "design"
    (d / "revisions").mkdir(parents=True, exist_ok=True)
    (d / f"{base}.toml").write_bytes(src.read_bytes())
    (d / "revisions" / "01-A.toml").write_bytes(src.read_bytes())
    analysis = demo_analysis(base)
    analysis["kit_version"] = kit.__version__
    (d / "revisions" / "01-A.analysis.json").write_text(_json_text(analysis), encoding="utf-8")
    return d


#: What may be wrong with a design folder. A cache the kit cannot use ("garbage_cache",
#: "cache_not_dict", most of "mutate_cache") makes ``history`` analyse the revision again
#: (about a minute on the demo quad): these are in SLOW_HISTORY_KINDS, run by ``make fuzz``.
QUICK_HISTORY_KINDS = ("add_invalid", "add_missing", "two_designs", "no_design",
                       "bad_revision_name", "revision_is_dir", "add_other_name", "add_directory")
SLOW_HISTORY_KINDS = ("mutate_cache", "garbage_cache", "cache_not_dict")
HISTORY_KINDS = QUICK_HISTORY_KINDS + SLOW_HISTORY_KINDS


def run_history_case(ch: Chooser, folder: Path, time_limit_s: float = 0.0,
                     kinds: Sequence[str] = QUICK_HISTORY_KINDS) -> tuple[list, Outcome]:
    """A design folder with one thing wrong in it (or a bad file to add): ``history``."""
    d = history_folder(folder)
    kind = ch.pick(kinds)
    cache = d / "revisions" / "01-A.analysis.json"
    argv = ["history", str(d)]
    if kind == "mutate_cache":
        doc = json.loads(cache.read_text(encoding="utf-8"))
        for _ in range(ch.integer(1, 3)):
            mutate_once(doc, ch)
        doc.setdefault("design", {})
        if isinstance(doc["design"], dict):
            # keep the cache valid for the file, so the mutated analysis is used
            doc["design"]["sha256"] = hashlib.sha256(
                (d / "revisions" / "01-A.toml").read_bytes()).hexdigest()
        cache.write_text(_json_text(doc), encoding="utf-8", errors="surrogatepass")
    elif kind == "garbage_cache":
        cache.write_bytes(bytes(ch.integer(0, 255) for _ in range(40)))
    elif kind == "cache_not_dict":
        cache.write_text(ch.pick(("[]", "1", "null", '"x"')), encoding="utf-8")
    elif kind in ("add_invalid", "add_other_name", "add_missing", "add_directory"):
        bad = folder / "next.toml"
        if kind == "add_invalid":
            doc, _ = mutated(ch, max_ops=2)
            bad.write_text(to_toml(doc), encoding="utf-8", errors="surrogatepass")
        elif kind == "add_other_name":
            doc = demo_documents()[0]
            doc["design"]["name"] = ch.pick(NASTY_TEXT[:6])
            doc["rotor"] = "bad"  # invalid too: nothing is analysed
            bad.write_text(to_toml(doc), encoding="utf-8")
        elif kind == "add_directory":
            bad.mkdir()
        argv += ["--add", str(bad)]
    elif kind == "two_designs":
        (d / "second.toml").write_text("x = 1\n", encoding="utf-8")
    elif kind == "no_design":
        next(d.glob("*.toml")).unlink()
    elif kind == "bad_revision_name":
        (d / "revisions" / "02-B.toml").write_text(ch.pick(("x = [", "", "\x00")),
                                                 encoding="utf-8")
    elif kind == "revision_is_dir":
        (d / "revisions" / "02-B.toml").mkdir()
    return [kind], run_argv(argv, time_limit_s)


# options ------------------------------------------------------------------------------------------


def option_cases(folder: Path) -> list[list[str]]:
    """Wrong options and arguments for every command (each must be one line, exit 2)."""
    quad = str(ROOT / "data" / "designs" / "survey_quad.toml")
    missing = str(folder / "missing.toml")
    a_dir = str(folder)
    existing = folder / "exists.json"
    existing.write_text("{}\n", encoding="utf-8")
    bad_json = folder / "bad.json"
    bad_json.write_text('{"schema": "other/1"}', encoding="utf-8")
    cases = [
        [], ["--bogus"], ["nosuchcommand"], ["check"], ["check", "--bogus", quad],
        ["check", missing], ["check", a_dir], ["check", "--json", missing],
        ["equations"], ["equations", quad, "--json"], ["equations", missing],
        ["analyze"], ["analyze", quad, quad], ["analyze", missing], ["analyze", "--strict=1", quad],
        ["sweep", quad], ["sweep", quad, "--part", "nosuch"],
        ["sweep", quad, "--part", "battery", "--points", "x"],
        ["sweep", quad, "--part", "battery", "--points", "0"],
        ["sweep", quad, "--part", "battery", "--points", "100000"],
        ["sweep", quad, "--part", "battery", "--points", "1e3"],
        ["sweep", quad, "--part", "battery", "--span-m", "nan"],
        ["sweep", quad, "--part", "battery", "--span-m", "inf"],
        ["sweep", quad, "--part", "battery", "--span-m", "1e300"],
        ["sweep", quad, "--part", "battery", "--span-m", "-1"],
        ["sweep", quad, "--part", "battery", "--span-m", "abc"],
        ["sweep", quad, "--part", "battery", "--failed", "nosuch"],
        ["sweep", quad, "--part", "battery", "--scheduler", "tcp://127.0.0.1:1"],
        ["sweep", missing, "--part", "battery"],
        ["record"], ["record", missing], ["record", quad, "--workbooks"],
        ["record", quad, "--workbooks", "nosuch", "--out", str(folder / "rec")],
        ["record", quad, "--out", str(existing)],
        ["record", quad, "--template-dir", missing, "--out", str(folder / "rec2")],
        ["record", quad, "--previous", missing, "--out", str(folder / "rec3")],
        ["record", quad, "--previous", str(bad_json), "--out", str(folder / "rec4")],
        ["compare"], ["compare", quad], ["compare", missing, quad],
        ["compare", str(bad_json), quad], ["compare", quad, quad, "--erosion", "0"],
        ["compare", quad, quad, "--erosion", "nan"], ["compare", quad, quad, "--erosion", "2"],
        ["compare", quad, quad, "--erosion", "x"], ["compare", quad, quad, "--html"],
        ["history"], ["history", missing], ["history", a_dir], ["history", quad],
        ["history", a_dir, "--add"],
        ["gains"], ["gains", missing], ["gains", quad, "--out", str(existing)],
        ["gains", quad, "--out", a_dir, "--force"],
        ["new"], ["new", str(folder / "n1")], ["new", str(folder / "n2"), "--from", missing],
        ["new", str(existing), "--from", quad],
        ["check", quad, "--json", "--expanded", "--debug"],
    ]
    return cases


#: Option names and values an argv mutation may insert.
OPTION_WORDS = ("--json", "--strict", "--force", "--points", "--span-m", "--erosion", "--html",
                "--add", "--out", "--part", "--failed", "--latex", "--expanded", "--wait",
                "--workbooks", "--from", "--previous", "-", "--", "-x", "--jsn", "nan", "-1",
                "1e999", "", "\x1b[2J", "\u202e", "x" * 300)


def mutated_argv(ch: Chooser, folder: Path) -> list[str]:
    """An option case with a token inserted, dropped or replaced (never a full record or
    sweep run: those commands get only tokens that keep them failing early)."""
    argv = list(ch.pick(option_cases(folder)))
    for _ in range(ch.integer(1, 2)):
        op = ch.integer(0, 2)
        if op == 0 or not argv:
            argv.insert(ch.integer(0, len(argv)), ch.pick(OPTION_WORDS))
        elif op == 1:
            argv.pop(ch.integer(0, len(argv) - 1))
        else:
            argv[ch.integer(0, len(argv) - 1)] = ch.pick(OPTION_WORDS)
    return argv


#: Commands that may run long with valid options (records, sweeps, analyses): a mutated argv
#: that names one of them is skipped unless it is sure to fail early.
LONG_COMMANDS = ("record", "sweep", "analyze", "gains", "compare", "new", "history")


def argv_is_quick(argv: Sequence[str]) -> bool:
    """Whether a mutated argv cannot start a long run (a workbook record, a sweep, an analysis
    of a valid design)."""
    words = [a for a in argv if a and not a.startswith("-")]
    if not words or words[0] not in LONG_COMMANDS:
        return True
    return any(a.endswith(("missing.toml", "bad.json")) for a in argv)


def run_option_case(argv: Sequence[str], time_limit_s: float = 0.0) -> Outcome:
    """One option case; a wrong option must be exit 2 with one line."""
    return run_argv(list(argv), time_limit_s, ok_codes=(0, 3))

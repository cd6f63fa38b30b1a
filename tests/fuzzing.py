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
import io
import json
import math
import random
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
    """What one command did with one file: ``kind`` is 'ok', 'rejected' (exit 2 with a line
    on stderr), or a problem: 'exception:<type>', 'hang', 'bad-json', 'silent-exit-2',
    'exit-<n>'."""

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
    """Classify one command's answer."""
    if problem.startswith("hang"):
        return Outcome(command, "hang", problem)
    if problem:
        name = problem.split(":")[1]
        return Outcome(command, f"exception:{name}", problem)
    if as_json and stdout.strip():
        try:
            strict_json(stdout)
        except ValueError as exc:
            return Outcome(command, "bad-json", str(exc)[:200])
    if "PYTHON-WARNING" in stderr:
        line = next(x for x in stderr.splitlines() if "PYTHON-WARNING" in x)
        return Outcome(command, "warning:" + line.split()[1].rstrip(":"), line[:200])
    if code == 0:
        return Outcome(command, "ok")
    if code == 2:
        if not stderr.strip():
            return Outcome(command, "silent-exit-2")
        return Outcome(command, "rejected", stderr.strip().splitlines()[0][:200])
    if code == 3 and command == "analyze":
        return Outcome(command, "ok", "design checks failed")
    return Outcome(command, f"exit-{code}", stderr.strip()[:200])


def run_case(doc: dict, folder: Path, analysis: bool = True, time_limit_s: float = 0.0,
             name: str = "case.toml") -> list[Outcome]:
    """Write ``doc`` as a design file in ``folder``, run check (and analyze when the file
    loads); return the outcomes."""
    path = folder / name
    path.write_text(to_toml(doc), encoding="utf-8", errors="surrogatepass")
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

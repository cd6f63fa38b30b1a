"""Fuzzing the design loader and the analysis with mutated demo designs (hypothesis).

Every mutated file must get an answer: a result, or the kit's own error with a line on stderr
and exit 2; never an escaped exception, a hang, a Python warning on stderr, or JSON holding NaN
or Infinity. The mutations are in ``tests/fuzzing.py``; ``make fuzz`` runs 10,000 of them.
"""

from __future__ import annotations

import copy

import fuzzing
import pytest
from hypothesis import HealthCheck, Phase, given, settings
from hypothesis import strategies as st

DOCS = fuzzing.demo_documents()
#: Wall time after which one command counts as a hang, s (the per-case time box is 20 s).
HANG_S = 300.0
SETTINGS = dict(deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
#: The analysis runs take up to minutes each: no shrinking (the failing example is printed as
#: drawn), so a failure cannot stretch the suite past its time budget. `make fuzz` runs more.
SLOW = dict(SETTINGS, phases=(Phase.explicit, Phase.reuse, Phase.generate))


def _answered(outcomes):
    bad = [o for o in outcomes if not o.good]
    assert not bad, [(o.command, o.kind, o.detail) for o in bad]


@settings(max_examples=200, **SETTINGS)
@given(data=st.data())
def test_loader_answers_every_mutated_design(data, tmp_path):
    doc, _kinds = fuzzing.mutated(fuzzing.DrawChooser(data), DOCS)
    _answered(fuzzing.run_case(doc, tmp_path, analysis=False, time_limit_s=HANG_S))


@pytest.mark.slow
@settings(max_examples=10, **SLOW)
@given(data=st.data())
def test_analysis_answers_every_mutated_design(data, tmp_path):
    doc, _kinds = fuzzing.mutated(fuzzing.DrawChooser(data), DOCS, max_ops=2)
    _answered(fuzzing.run_case(doc, tmp_path, analysis=True, time_limit_s=HANG_S))


@pytest.mark.slow
@settings(max_examples=4, **SLOW)
@given(data=st.data())
def test_analysis_at_the_edges_of_the_limits(data, tmp_path):
    ch = fuzzing.DrawChooser(data)
    doc = copy.deepcopy(ch.pick(DOCS))
    fuzzing.edge_mutation(doc, ch)
    outcomes = fuzzing.run_case(doc, tmp_path, analysis=True, time_limit_s=HANG_S)
    _answered(outcomes)


def test_the_harness_sees_an_escaped_exception(tmp_path, monkeypatch):
    """The fuzzer's own check: an exception that escapes the command is reported as such."""
    import kit.cli

    def boom(args):
        raise ZeroDivisionError("planted")

    monkeypatch.setattr(kit.cli, "cmd_check", boom)
    outcomes = fuzzing.run_case(copy.deepcopy(DOCS[0]), tmp_path, analysis=False)
    assert [o.kind for o in outcomes] == ["exception:ZeroDivisionError"]


def test_the_harness_refuses_nan_in_json():
    with pytest.raises(ValueError, match="NaN"):
        fuzzing.strict_json('{"a": NaN}')

"""Placement sweep: executor independence, symmetry, progress, wheel and errors."""

from __future__ import annotations

import json
from concurrent.futures import ThreadPoolExecutor
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from kit import design
from kit.analysis import sweep

ROOT = Path(__file__).resolve().parents[1]
FAILED = ("front_left", "rear_right")
OFFSETS = np.array([-0.02, 0.0, 0.02])


@pytest.fixture(scope="module")
def quad_design():
    return design.load(ROOT / "data" / "designs" / "survey_quad.toml")


@pytest.fixture(scope="module")
def symmetric_design(quad_design):
    # the survey quad with its camera and mast moved onto the centre line: every part is then
    # symmetric under a half turn about z, which maps front_left <-> rear_right (both ccw)
    parts = tuple(replace(p, position_m=(0.0, 0.0, p.position_m[2]))
                  if p.name in ("nadir camera", "gnss mast") else p
                  for p in quad_design.parts)
    return replace(quad_design, parts=parts)


def _arrays(m: sweep.PlacementMap) -> dict:
    out = {}
    for case in ("failure", "hover"):
        cm = getattr(m, case)
        for name in ("found", "spin_rate_rad_s", "controllability_distance",
                     "saturation_probability", "h2_norm", "max_thrust_fraction"):
            out[f"{case}.{name}"] = getattr(cm, name)
    return out


@pytest.mark.slow
def test_thread_and_process_pool_agree(quad_design):
    with ThreadPoolExecutor(max_workers=2) as ex:
        a = sweep.placement_sweep(quad_design, "battery", OFFSETS, OFFSETS, FAILED, executor=ex)
    b = sweep.placement_sweep(quad_design, "battery", OFFSETS, OFFSETS, FAILED)
    # the same numbers to rounding: the worker processes run single-threaded BLAS, whose
    # summation order may differ from the threaded parent's in the last bit
    for key, va in _arrays(a).items():
        np.testing.assert_allclose(np.asarray(va, float), np.asarray(_arrays(b)[key], float),
                                   rtol=1e-12, atol=1e-300, equal_nan=True, err_msg=key)
    assert a.to_dict().keys() == b.to_dict().keys()


def test_half_turn_symmetric_map_and_progress(symmetric_design):
    calls = []
    with ThreadPoolExecutor(max_workers=2) as ex:
        m = sweep.placement_sweep(symmetric_design, "battery", OFFSETS, OFFSETS, FAILED,
                                  executor=ex, progress=lambda d, t: calls.append((d, t)))
    assert calls[0] == (0, 9) and calls[-1] == (9, 9)
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)
    f = m.failure
    assert f.found.all()
    # (dx, dy) and (-dx, -dy) give the same vehicle turned by 180 deg about z
    for a in (f.spin_rate_rad_s, f.h2_norm, f.saturation_probability, f.max_thrust_fraction,
              m.hover.h2_norm):
        np.testing.assert_allclose(a, a[::-1, ::-1], rtol=1e-6, atol=1e-12)
    # the distance to uncontrollability is an iterative minimum (control.controllability,
    # damped Newton stopped at rounding): it repeats to about 1e-5 relative only
    np.testing.assert_allclose(f.controllability_distance, f.controllability_distance[::-1, ::-1],
                               rtol=1e-3)
    # moving the battery changes the answer (the map is not flat)
    assert np.ptp(f.spin_rate_rad_s) > 1.0
    np.testing.assert_allclose(m.hover.spin_rate_rad_s, 0.0, atol=1e-6)
    # centre of mass moves by m_battery / m times the offset (parallel-axis bookkeeping)
    dcom = m.com_m[1, 2, 0] - m.com_m[1, 1, 0]
    total = sum(p.mass_kg for p in symmetric_design.parts) + sum(
        r.mass_kg for r in symmetric_design.rotors)
    assert dcom == pytest.approx(0.42 / total * 0.02, rel=1e-9)  # battery 0.42 kg (file)
    d = m.to_dict()
    json.dumps(d, allow_nan=False)
    assert d["summary"]["failure"]["found"] == 9
    assert "<table" in m._repr_html_()


def test_wheel_sweep_and_html_escaping(quad_design):
    wq = design.load(ROOT / "data" / "designs" / "wheel_quad.toml")
    with ThreadPoolExecutor(max_workers=1) as ex:
        m = sweep.placement_sweep(wq, "wheel", [0.0, 0.01], [0.0], executor=ex)
    assert m.failure is None and m.shape == (1, 2)
    assert m.com_m[0, 1, 0] > m.com_m[0, 0, 0]
    named = replace(quad_design, name="<script>x</script>")
    with ThreadPoolExecutor(max_workers=1) as ex:
        m2 = sweep.placement_sweep(named, "battery", [0.0], [0.0], executor=ex)
    assert "<script>" not in m2._repr_html_()


def test_bad_inputs(quad_design):
    with pytest.raises(ValueError, match="battery"):
        sweep.placement_sweep(quad_design, "batery", [0.0], [0.0])
    with pytest.raises(ValueError, match="wheel"):
        sweep.base_position(quad_design, "wheel")
    with pytest.raises(ValueError, match="front_left"):
        sweep.placement_sweep(quad_design, "battery", [0.0], [0.0], ("front-left",))


def test_zero_offset_point_equals_analyze(quad_design):
    # The operating point is a function of the design alone: the sweep's zero-offset point is
    # the design itself, so its numbers are those of `analyze` (which once differed: -26.6
    # against +19.1 rad/s for front_left failed, by where the search started), and they do not
    # depend on the order in which the points are visited.
    from kit.analysis.report import analyze

    xs = np.array([0.03, -0.03, 0.0])  # zero offset visited last in its row
    with ThreadPoolExecutor(max_workers=1) as ex:
        m = sweep.placement_sweep(quad_design, "battery", xs, [0.0], ("front_left",),
                                  executor=ex)
    rep = analyze(quad_design, wheel=False)
    case = rep.case(("front_left",))
    f = m.failure
    assert f.spin_rate_rad_s[0, 2] == case.eq.spin_rate_rad_s
    assert f.saturation_probability[0, 2] == case.risk.probability_per_s
    assert f.controllability_distance[0, 2] == case.ctl.controllability_distance
    assert m.hover.spin_rate_rad_s[0, 2] == rep.case(()).eq.spin_rate_rad_s
    with ThreadPoolExecutor(max_workers=1) as ex:
        m2 = sweep.placement_sweep(quad_design, "battery", xs[::-1], [0.0], ("front_left",),
                                   executor=ex)
    np.testing.assert_array_equal(m2.failure.spin_rate_rad_s[0, ::-1], f.spin_rate_rad_s[0])


def test_local_dask_cluster_gives_the_process_pool_numbers(quad_design):
    # dask.distributed (the 'cluster' extra) runs the same row tasks: a local cluster of
    # in-process workers must give the process pool's numbers.
    pytest.importorskip("distributed")
    xs = np.array([-0.02, 0.02])
    with sweep.cluster_executor(None, n_workers=2) as ex:
        a = sweep.placement_sweep(quad_design, "battery", xs, xs, FAILED, executor=ex)
    b = sweep.placement_sweep(quad_design, "battery", xs, xs, FAILED)
    for key, va in _arrays(a).items():
        np.testing.assert_allclose(np.asarray(va, float), np.asarray(_arrays(b)[key], float),
                                   rtol=1e-12, atol=1e-300, equal_nan=True, err_msg=key)


def test_cli_scheduler_option_errors(tmp_path, capsys):
    # A scheduler that does not answer: one clear line naming the option, exit 2.
    pytest.importorskip("distributed")
    from kit import cli

    code = cli.main(["sweep", str(ROOT / "data" / "designs" / "survey_quad.toml"),
                     "--part", "battery", "--points", "2", "--scheduler", "tcp://127.0.0.1:9"])
    assert code == 2
    err = capsys.readouterr().err
    assert "--scheduler" in err and "Traceback" not in err

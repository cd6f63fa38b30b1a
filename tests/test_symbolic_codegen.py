"""Generated functions against sympy subs/evalf, broadcasting, docstrings, and the disk cache."""

from __future__ import annotations

import os
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from _reference_field import generated, random_params

from kit.errors import CacheWarning
from kit.numeric import model as model_mod
from kit.symbolic import cache
from kit.symbolic.codegen import function_specs, generate_source
from kit.symbolic.rigid_body import symbols_for
from kit.symbolic.structure import Structure

ROOT = Path(__file__).resolve().parents[1]


def _random_args(spec, rng, n):
    values = {}
    for arg in spec.args:
        if arg.name == "par":
            values[arg.name] = random_params(rng, n, any(s.name == "hw" for s in arg.symbols))
        elif arg.name == "f":
            values[arg.name] = rng.uniform(0.5, 6.0, n)
        elif arg.name == "z":
            values[arg.name] = np.concatenate(
                [[rng.uniform(-4, 4)], rng.uniform(-0.5, 0.5, 2), rng.uniform(0.5, 6.0, n)]
            )
        elif arg.name == "xr":
            values[arg.name] = np.concatenate([rng.uniform(-3, 3, 3), rng.uniform(-0.5, 0.5, 2)])
        else:
            values[arg.name] = rng.uniform(-1.0, 1.0, len(arg.symbols))
    return values


@pytest.mark.parametrize("cse", [True, False])
@pytest.mark.parametrize(
    ("n", "wheel", "drag"), [(3, True, "linear"), (4, False, "quadratic"), (6, True, "linear")]
)
def test_generated_matches_subs_evalf(n, wheel, drag, cse):
    # pydy-style backend agreement: lambdified code vs exact evaluation at random points.
    st = Structure(n, wheel, drag)
    mod = generated(n, wheel, drag, cse)
    sym = symbols_for(st)
    jinv = sym.jinv_subs
    rng = np.random.default_rng(n + 10 * int(cse))
    for spec in function_specs(st):
        values = _random_args(spec, rng, n)
        subs = {}
        for arg in spec.args:
            for s, v in zip(arg.symbols, values[arg.name], strict=True):
                subs[s] = sp.Float(float(v), 30)
        got = getattr(mod, spec.name)(*(values[a.name] for a in spec.args))
        got = got if isinstance(got, tuple) else (got,)
        for (_, mat, shape, _), out in zip(spec.outputs, got, strict=True):
            assert out.shape == shape
            exact = mat.xreplace(jinv).xreplace(subs).evalf(30)
            expect = np.array(exact.tolist(), dtype=float).reshape(shape)
            np.testing.assert_allclose(out, expect, rtol=1e-11, atol=1e-11)


def test_broadcasting_batch_equals_loop():
    mod = generated(4, True)
    rng = np.random.default_rng(2)
    par = random_params(rng, 4, True, batch=(3, 1))
    xr = np.concatenate([rng.uniform(-2, 2, (3, 5, 3)), rng.uniform(-0.4, 0.4, (3, 5, 2))], -1)
    f = rng.uniform(0.5, 5.0, (5, 4))
    A, B = mod.reduced_AB(xr, f, par)
    assert A.shape == (3, 5, 4, 4) and B.shape == (3, 5, 4, 4)
    for a in range(3):
        for b in range(5):
            A1, B1 = mod.reduced_AB(xr[a, b], f[b], par[a, 0])
            np.testing.assert_allclose(A[a, b], A1, rtol=1e-14)
            np.testing.assert_allclose(B[a, b], B1, rtol=1e-14)
    assert mod.eq_jacobian(np.ones((2, 7)) * 0.3, par[0, 0]).shape == (2, 4, 7)
    assert mod.attitude_rhs(np.zeros(3), np.array([0, 0, 1.0]), f, par[0, 0]).shape == (5, 6)


def test_wrong_vector_length_is_an_error():
    mod = generated(4, True)
    with pytest.raises(ValueError, match="par: expected shape"):
        mod.omega_dot(np.zeros(3), np.ones(4), np.ones(5))


def test_generated_docstrings_list_arguments_and_units():
    st = Structure(3, True)
    mod = generated(3, True)
    for spec in function_specs(st):
        doc = getattr(mod, spec.name).__doc__
        for arg in spec.args:
            assert f"{arg.name} : array_like, shape (..., {len(arg.symbols)})" in doc
        for k, name in enumerate(st.param_names()):
            if any(a.name == "par" for a in spec.args):
                assert f"[{k}] {name} [{st.param_units()[k]}]" in doc
        assert "Returns" in doc


def test_translation_accel_hover_and_tilt():
    mod = generated(4, False)
    rng = np.random.default_rng(0)
    par = random_params(rng, 4, False)
    m, g = par[0], par[1]
    f = np.full(4, m * g / 4)
    # Identity attitude, thrust = weight: zero acceleration.
    np.testing.assert_allclose(mod.translation_accel([1, 0, 0, 0], f, par), 0, atol=1e-12)
    # 90 deg about world x (body z to -y world), non-unit quaternion: a = (0, -g, -g).
    quat = 3.0 * np.array([np.cos(np.pi / 4), np.sin(np.pi / 4), 0, 0])
    np.testing.assert_allclose(mod.translation_accel(quat, f, par), [0, -g, -g], atol=1e-12)


# ---- disk cache -----------------------------------------------------------------------------


@pytest.fixture
def cache_dir(tmp_path, monkeypatch):
    monkeypatch.setenv("ROTORBOOK_CACHE_DIR", str(tmp_path))
    return tmp_path


def test_cache_key_does_not_import_sympy():
    code = (
        "import sys\n"
        "from kit.symbolic import cache, Structure\n"
        "k = cache.cache_key(Structure(4, True))\n"
        "assert 'sympy' not in sys.modules, 'sympy imported'\n"
        "print(k)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True,
                         check=True)
    key = out.stdout.strip()
    assert key.startswith("n4-wheel-linear|kit=") and "|sympy=" in key and "|src=" in key


def test_warm_start_derives_nothing_and_imports_no_sympy(cache_dir):
    env = dict(os.environ, ROTORBOOK_CACHE_DIR=str(cache_dir))
    code = (
        "import sys\n"
        "from kit.numeric import load_model\n"
        "from kit.symbolic import Structure\n"
        "m = load_model(Structure(3, True))\n"
        "print('sympy' in sys.modules, m.path)\n"
    )
    cold = subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True,
                          text=True, check=True)
    assert cold.stdout.split()[0] == "True"  # a cold start derives (imports sympy)
    path = Path(cold.stdout.split()[1])
    assert path.is_file() and path.parent.parent == cache_dir
    stamp = path.stat().st_mtime_ns
    warm = subprocess.run([sys.executable, "-W", "error", "-c", code], cwd=ROOT, env=env,
                          capture_output=True, text=True, check=True)
    assert warm.stdout.split()[0] == "False", warm.stdout
    assert path.stat().st_mtime_ns == stamp  # not rewritten


def test_cached_module_has_key_and_checksum(cache_dir):
    st = Structure(3, False)
    model = model_mod.load_model.__wrapped__(st)
    text = model.path.read_text()
    assert f'CACHE_KEY = "{cache.cache_key(st)}"' in text
    assert cache.check_source(text, cache.cache_key(st)) is None
    assert cache.check_source(text, "other") is not None
    assert model.module.STRUCTURE_KEY == st.key
    # No temporary files left behind by the atomic write.
    assert [p.name for p in model.path.parent.iterdir()] == [model.path.name]


@pytest.mark.parametrize("damage", ["corrupt", "stale", "syntax"])
def test_corrupt_or_stale_cache_warns_and_rebuilds(cache_dir, damage):
    st = Structure(3, False)
    first = model_mod.load_model.__wrapped__(st)
    text = first.path.read_text()
    if damage == "corrupt":
        bad = text.replace("numpy.empty", "numpy.zeros", 1)
    elif damage == "stale":
        bad = text.replace("CACHE_KEY = \"", "CACHE_KEY = \"old-", 1)
    else:
        bad = text[: len(text) // 2]
    first.path.write_text(bad)
    with pytest.warns(CacheWarning, match="stale or corrupt"):
        again = model_mod.load_model.__wrapped__(st)
    assert again.path.read_text() == text
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        model_mod.load_model.__wrapped__(st)  # now a clean hit


def test_verified_module_that_fails_to_import_is_rebuilt(cache_dir):
    st = Structure(3, False)
    first = model_mod.load_model.__wrapped__(st)
    head, _, _ = first.path.read_text().partition(cache.BODY_MARKER)
    body = "raise ImportError('boom')\n"
    head = head.split("BODY_SHA256")[0] + f'BODY_SHA256 = "{cache.body_sha256(body)}"\n'
    first.path.write_text(head + cache.BODY_MARKER + body)
    with pytest.warns(CacheWarning, match="failed to import"):
        model_mod.load_model.__wrapped__(st)


def test_load_model_is_memoised_and_packs_parameters(cache_dir):
    st = Structure(4, True)
    model = model_mod.load_model(st)
    assert model_mod.load_model(st) is model
    assert model.param_names == st.param_names()
    values = dict(zip(st.param_names(), range(st.n_params), strict=True))
    np.testing.assert_array_equal(model.pack(values), np.arange(st.n_params))
    assert model.unpack(model.pack(values))["hw"] == 11
    with pytest.raises(KeyError, match="missing"):
        model.pack({"m": 1.0})


def test_cse_changes_code_not_results():
    st = Structure(4, True)
    with_cse = generate_source(st, cse=True, key="k")
    without = generate_source(st, cse=False, key="k")
    assert "_t0 = " in with_cse and "_t0 = " not in without

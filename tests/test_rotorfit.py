"""Stand-data fits (kit.rotorfit) against scipy.optimize.curve_fit and numpy, and on synthetic data.

Check values: scipy.optimize.curve_fit (absolute_sigma=False: the covariance is scaled by the
residual variance, the usual least-squares standard error) and numpy.polyfit on the same data;
a synthetic stand file made from known coefficients plus seeded Gaussian noise, recovered within
3 standard errors (common practice, no source).
"""

import hashlib
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import curve_fit

from kit import design, rotorfit
from kit.errors import DesignError

ROOT = Path(__file__).resolve().parents[1]
DESIGNS = ROOT / "data" / "designs"
K_TRUE, KAPPA_TRUE = 8.5e-6, 0.016


def _synthetic(seed: int, n: int = 20, sigma_t: float = 0.03, sigma_q: float = 0.0008):
    rng = np.random.default_rng(seed)
    w = np.linspace(300.0, 1000.0, n)
    t = K_TRUE * w ** 2 + rng.normal(0.0, sigma_t, n)
    q = KAPPA_TRUE * t + rng.normal(0.0, sigma_q, n)
    return w, t, q


def _csv(w, t, q) -> str:
    rows = "\n".join(f"{float(a)!r},{float(b)!r},{float(c)!r}"
                     for a, b, c in zip(w, t, q, strict=True))
    return "# synthetic stand data (made up for a test)\nspeed_rad_s,thrust_n,torque_n_m\n" + rows


def _quad_with_stand(tmp_path: Path, stand_name: str) -> Path:
    """The demo survey quad with its rotor coefficients replaced by ``stand_data``."""
    text = (DESIGNS / "survey_quad.toml").read_text(encoding="utf-8")
    coeffs = "torque_per_thrust_m = 0.016\nthrust_coeff_n_s2 = 8.5e-6\n"
    assert coeffs in text  # else the replacement below would silently do nothing
    path = tmp_path / "quad.toml"
    path.write_text(text.replace(coeffs, f'stand_data = "{stand_name}"\n'), encoding="utf-8")
    return path


def test_fit_equals_curve_fit_and_polyfit():
    w, t, q = _synthetic(1)
    f = rotorfit.fit(rotorfit.read_stand_text(_csv(w, t, q)))
    popt, pcov = curve_fit(lambda x, k: k * x ** 2, w, t, p0=[1e-5])
    assert f.thrust_coeff_n_s2 == pytest.approx(popt[0], rel=1e-8)
    assert f.thrust_coeff_se_n_s2 == pytest.approx(np.sqrt(pcov[0, 0]), rel=1e-6)
    popt, pcov = curve_fit(lambda x, kappa: kappa * x, t, q, p0=[0.01])
    assert f.torque_per_thrust_m == pytest.approx(popt[0], rel=1e-8)
    assert f.torque_per_thrust_se_m == pytest.approx(np.sqrt(pcov[0, 0]), rel=1e-6)
    # numpy.polyfit with the intercept free: its slope is within a few standard errors of the
    # through-origin slope, and its intercept is within a few of its own standard errors of 0
    p, cov = np.polyfit(w ** 2, t, 1, cov=True)
    assert abs(p[1]) < 3 * np.sqrt(cov[1, 1])
    assert abs(p[0] - f.thrust_coeff_n_s2) < 3 * np.sqrt(cov[0, 0])
    np.testing.assert_allclose(f.thrust_residuals_n, t - f.thrust_coeff_n_s2 * w ** 2)


@pytest.mark.parametrize("seed", [2, 3, 4])
def test_synthetic_stand_file_recovers_known_coefficients(tmp_path, seed):
    w, t, q = _synthetic(seed)
    path = tmp_path / "stand.csv"
    path.write_text(_csv(w, t, q), encoding="utf-8")
    f = rotorfit.fit(rotorfit.read_stand_file(path))
    assert abs(f.thrust_coeff_n_s2 - K_TRUE) < 3 * f.thrust_coeff_se_n_s2
    assert abs(f.torque_per_thrust_m - KAPPA_TRUE) < 3 * f.torque_per_thrust_se_m
    assert f.poor == []
    assert len(f.sha256) == 64


def test_fitted_values_flow_into_the_design_and_are_recorded(tmp_path):
    w, t, q = _synthetic(5)
    (tmp_path / "stand.csv").write_text(_csv(w, t, q), encoding="utf-8")
    d = design.load(_quad_with_stand(tmp_path, "stand.csv"))
    f = d.rotor_fits[0]
    assert f.rotors == ("front_left", "front_right", "rear_right", "rear_left")
    assert all(r.thrust_coeff_n_s2 == f.thrust_coeff_n_s2 for r in d.rotors)
    assert all(r.torque_per_thrust_m == f.torque_per_thrust_m for r in d.rotors)
    assert f.sha256 == hashlib.sha256((tmp_path / "stand.csv").read_bytes()).hexdigest()
    assert f.to_dict()["fitted"] is True


def test_poor_fit_warns(tmp_path):
    w, _, _ = _synthetic(6)
    scatter = np.random.default_rng(6).uniform(0.5, 1.5, w.size)  # +-50 %: a poor stand run
    t = K_TRUE * w ** 2 * scatter
    q = KAPPA_TRUE * t
    (tmp_path / "stand.csv").write_text(_csv(w, t, q), encoding="utf-8")
    path = _quad_with_stand(tmp_path, "stand.csv")
    d = design.from_dict(tomllib.loads(path.read_text(encoding="utf-8")), source=str(path))
    assert any("stand data stand.csv: poor fit (thrust fit R^2" in w for w in d.warnings)


@pytest.mark.parametrize("text, fragment", [
    ("speed_rad_s,thrust_n\n1,2\n2,3\n3,4\n", "column 'torque_n_m' missing"),
    ("speed_rad_s,thrust_n,torque_n_m,temp\n1,2,3,4\n", "column 'temp' -> one of"),
    ("speed_rpm,thrust_n,torque_n_m\n1,2,3\n", r"column 'speed_rpm' -> speed in rad/s .*0\.10472"),
    ("thrust_g,speed_rad_s,torque_n_m\n1,2,3\n", r"thrust in N .*0\.00980665"),
    ("speed_rad_s;thrust_n;torque_n_m\n1;2;3\n", "separate the columns with commas"),
    ("speed_rad_s,thrust_n,torque_n_m,thrust_n\n1,2,3,2\n", "column 'thrust_n' is named twice"),
    ("speed_rad_s,thrust_n,torque_n_m\n1,2,0.1\n2,3 N,0.2\n3,4,0.3\n",
     "data line 3, thrust_n: '3 N' -> a number"),
    ("speed_rad_s,thrust_n,torque_n_m\n1,2,0.1\n", "at least 3 operating points"),
    ("speed_rad_s,thrust_n,torque_n_m\n1,2,0.1\n-2,3,0.2\n3,4,0.3\n",
     "data line 3, speed_rad_s: '-2' -> a finite number from 1 to 100000 rad/s"),
    ("speed_rad_s,thrust_n,torque_n_m\n1,2,0.1\n2,-3,0.2\n3,4,0.3\n", "thrust_n: '-3'"),
    ("speed_rad_s,thrust_n,torque_n_m\n1,2,0.1\n2,3,nan\n3,4,0.3\n", "torque_n_m: 'nan'"),
    # speeds this small underflow the sums of fourth powers to zero
    ("speed_rad_s,thrust_n,torque_n_m\n1e-160,2,0.1\n2e-160,3,0.2\n3e-160,4,0.3\n",
     "speed_rad_s: '1e-160' -> a finite number from 1"),
    ("speed_rad_s,thrust_n,torque_n_m\n1e160,2,0.1\n2e160,3,0.2\n3e160,4,0.3\n",
     "speed_rad_s: '1e160' -> a finite number from 1"),
])
def test_bad_stand_text_is_one_clear_line(text, fragment):
    with pytest.raises(rotorfit.StandDataError, match=fragment):
        rotorfit.read_stand_text(text)


def test_a_byte_order_mark_is_read_as_utf8(tmp_path):
    """Spreadsheets write UTF-8 CSV with a byte-order mark; it is not part of the header."""
    text = "# made-up points\nspeed_rad_s,thrust_n,torque_n_m\n100,1,0.02\n200,4,0.08\n" \
           "300,9,0.18\n"
    plain, marked = tmp_path / "plain.csv", tmp_path / "marked.csv"
    plain.write_bytes(text.encode("utf-8"))
    marked.write_bytes(text.encode("utf-8-sig"))
    a, b = rotorfit.read_stand_file(plain), rotorfit.read_stand_file(marked)
    assert (a.thrust_n == b.thrust_n).all() and (a.speed_rad_s == b.speed_rad_s).all()


def test_stand_file_in_utf16_or_with_nul_bytes_is_refused(tmp_path):
    p = tmp_path / "s.csv"
    p.write_bytes("speed_rad_s,thrust_n,torque_n_m\n1,2,3\n".encode("utf-16"))
    with pytest.raises(rotorfit.StandDataError, match="save the file as UTF-8"):
        rotorfit.read_stand_file(p)
    p.write_bytes(b"speed_rad_s,thrust_n,torque_n_m\n1,2,3\x00\n")
    with pytest.raises(rotorfit.StandDataError, match="NUL"):
        rotorfit.read_stand_file(p)


def test_bad_stand_file_in_a_design_is_a_design_error(tmp_path):
    (tmp_path / "stand.csv").write_text("speed_rad_s,thrust_n\n1,2\n", encoding="utf-8")
    big = tmp_path / "big.csv"
    big.write_text("#" * (rotorfit.MAX_STAND_BYTES + 1), encoding="utf-8")
    for name, fragment in (("stand.csv", "column 'torque_n_m' missing"),
                           ("big.csv", "bytes -> at most"), ("none.csv", "no such file")):
        with pytest.raises(DesignError) as info:
            design.load(_quad_with_stand(tmp_path, name))
        assert any(p.startswith("rotor 'front_left'.stand_data: ") and fragment in p
                   for p in info.value.problems), info.value.problems


def test_demo_stand_file_says_it_is_invented():
    head = (DESIGNS / "heavy_hex_stand.csv").read_text(encoding="utf-8").splitlines()[0]
    assert head.startswith("#") and "invented" in head.lower()


def test_record_header_names_the_stand_file_and_its_sha256(tmp_path):
    """The record of a design with fitted rotor data carries the stand file's SHA-256."""
    import hashlib
    from pathlib import Path

    from kit import cli

    root = Path(__file__).resolve().parents[1] / "data" / "designs"
    out = tmp_path / "rec"
    assert cli.main(["record", str(root / "heavy_hex.toml"), "--workbooks", "hover",
                     "--out", str(out)]) == 0
    digest = hashlib.sha256((root / "heavy_hex_stand.csv").read_bytes()).hexdigest()
    page = (out / "hover.html").read_text(encoding="utf-8")
    assert f"Rotor data heavy_hex_stand.csv SHA-256</th><td class=\"rb-mono\">{digest}<" in page

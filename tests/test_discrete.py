"""Sampled-data loops: the bilinear map, the Jury table, the stable range in z, the zero-order hold.

Outside references: numpy.roots (unit-circle counts), scipy.signal.cont2discrete (zero-order-hold
equivalents), closed forms derived here from the Jury conditions for a second-order polynomial
(z^2 + a1 z + a0 is stable iff |a0| < 1, 1 + a1 + a0 > 0, 1 - a1 + a0 > 0: Jury 1961, from memory).
"""
from __future__ import annotations

import math
import random

import numpy as np
import pytest
from flint import fmpq, fmpq_poly

from core.algebra.polynomial import ParametricPolynomial, to_fmpq
from core.analysis.discrete import (
    bilinear,
    jury_certified,
    jury_stable,
    jury_table,
    meets_radius,
    radius_bounds,
    radius_range,
    schur_stable,
    unit_circle_counts,
    z_stable_range,
)


def random_polynomial(rng: random.Random, degree: int) -> list[fmpq]:
    """A rational polynomial (highest power first) from random rational roots and pairs, about half
    of them inside the unit circle."""
    def q() -> fmpq:
        return fmpq(rng.randint(-12, 12), 10)
    p = fmpq_poly([rng.randint(1, 5)])
    while p.degree() < degree:
        if rng.random() < 0.5:
            p *= fmpq_poly([-q(), 1])
        else:
            a, b = q(), q()
            p *= fmpq_poly([a * a + b * b, -2 * a, 1])
    return [p[i] for i in range(p.degree(), -1, -1)]


def numpy_counts(coeffs) -> tuple[int, int] | None:
    """(inside, outside) by numpy.roots; None when a root lies within 1e-3 of the circle."""
    mags = np.abs(np.roots([float(c) for c in coeffs]))
    if np.any(np.abs(mags - 1) < 1e-3):
        return None
    return int((mags < 1).sum()), int((mags > 1).sum())


def test_bilinear_maps_roots_by_w_equals_z_minus_1_over_z_plus_1():
    # z^2 - z/2 - 1/2 = (z - 1)(z + 1/2): w = 0 and w = (-1/2 - 1)/(-1/2 + 1) = -3 (the map, from memory)
    w = bilinear(ParametricPolynomial.from_coefficients([1, fmpq(-1, 2), fmpq(-1, 2)])).at()
    roots = sorted(np.roots([float(c) for c in w]).real)
    assert roots == pytest.approx([-3.0, 0.0])


def test_root_at_minus_one_drops_the_w_degree():
    # (z + 1)(z - 1/2): the root at z = -1 goes to w = infinity, the other to w = -1/3
    w = bilinear(ParametricPolynomial.from_coefficients([1, fmpq(1, 2), fmpq(-1, 2)])).at()
    assert len(w) == 2 and float(-w[1] / w[0]) == pytest.approx(-1 / 3)
    assert unit_circle_counts([1, fmpq(1, 2), fmpq(-1, 2)]).to_dict() == {"inside": 1, "on": 1, "outside": 0}


def test_unit_circle_roots_map_to_the_imaginary_w_axis():
    # z = e^(±j pi/3): z^2 - z + 1 -> w = ±j tan(pi/6) (from memory)
    w = bilinear(ParametricPolynomial.from_coefficients([1, -1, 1])).at()
    roots = np.roots([float(c) for c in w])
    assert np.allclose(roots.real, 0) and np.allclose(sorted(roots.imag), [-math.tan(math.pi / 6), math.tan(math.pi / 6)])


@pytest.mark.parametrize("seed", range(4))
def test_jury_agrees_with_the_w_plane_routh_and_numpy_counts(seed):
    rng = random.Random(seed)
    checked = 0
    for _ in range(60):
        coeffs = random_polynomial(rng, rng.randint(1, 9))
        counts = unit_circle_counts(coeffs)
        assert jury_stable(coeffs) == schur_stable(coeffs) == (counts.inside == len(coeffs) - 1)
        reference = numpy_counts(coeffs)  # numpy.roots as the outside reference
        if reference is not None:
            assert (counts.inside, counts.outside) == reference and counts.on == 0
            checked += 1
    assert checked > 20


def test_exact_on_circle_counts():
    # (z^2 + 1)(z - 1)(z + 1)^2 (z - 1/2) (z - 3): 5 on the circle, 1 inside, 1 outside
    p = fmpq_poly([1, 0, 1]) * fmpq_poly([-1, 1]) * fmpq_poly([1, 1]) ** 2 * fmpq_poly([fmpq(-1, 2), 1]) * fmpq_poly([-3, 1])
    coeffs = [p[i] for i in range(p.degree(), -1, -1)]
    assert unit_circle_counts(coeffs).to_dict() == {"inside": 1, "on": 5, "outside": 1}
    assert not jury_stable(coeffs)


def test_parametric_jury_table_agrees_with_the_w_range_at_rational_points():
    rng = random.Random(11)
    for _ in range(25):
        n = rng.randint(1, 6)
        coeffs = [fmpq_poly([fmpq(rng.randint(-6, 6), rng.randint(1, 3)), fmpq(rng.randint(-3, 3), 4)])
                  for _ in range(n + 1)]
        coeffs[0] = fmpq_poly([1])
        poly = ParametricPolynomial.from_coefficients(coeffs, "K")
        table, rng_z = jury_table(poly), z_stable_range(poly)
        for _ in range(15):
            k = fmpq(rng.randint(-80, 80), rng.randint(1, 9))
            assert table.stable_at(k) == rng_z.contains(k) == schur_stable(poly.at(k), n)


def test_ball_verdict_matches_the_exact_one_away_from_the_boundary():
    rng = random.Random(3)
    from flint import arb
    for _ in range(40):
        coeffs = random_polynomial(rng, rng.randint(1, 7))
        certified = jury_certified([arb(c) for c in coeffs])
        assert certified in (jury_stable(coeffs), None)
        if numpy_counts(coeffs) is not None:
            assert certified == jury_stable(coeffs)


def test_second_order_closed_form_range_and_kinds():
    # z^2 + (K - 1) z + 1/4: 1 + a1 + a0 = K + 1/4 > 0 and 1 - a1 + a0 = 9/4 - K > 0, |a0| < 1
    r = z_stable_range(ParametricPolynomial.from_coefficients([1, fmpq_poly([-1, 1]), fmpq(1, 4)], "K"),
                       sample_period=fmpq(1, 10))
    assert r.to_dict()["exact_intervals"] == [["-1/4", "9/4"]]
    low, high = r.endpoints
    assert (low.kind, low.angle, low.omega) == ("z_one", 0.0, 0.0)
    assert high.kind == "z_minus_one" and high.omega == pytest.approx(math.pi / 0.1)


def test_complex_pair_on_the_circle_gives_angle():
    # z^2 - z + K: |a0| < 1 limits K to 1, where z = e^(±j pi/3) (cos theta = 1/2)
    r = z_stable_range(ParametricPolynomial.from_coefficients([1, -1, fmpq_poly([0, 1])], "K"), sample_period=2)
    assert r.to_dict()["exact_intervals"] == [["0", "1"]]
    pair = r.endpoints[1]
    assert pair.kind == "unit_circle" and pair.angle == pytest.approx(math.pi / 3)
    assert pair.omega == pytest.approx(math.pi / 6)


def test_radius_requirement_is_a_scaled_circle():
    # z - K: the root K must satisfy |K| < e^(-sigma Ts); e^(-1/2) from math.exp
    poly = ParametricPolynomial.from_coefficients([1, fmpq_poly([0, -1])], "K")
    rng, ok = radius_range(poly, 5, fmpq(1, 10), nominal=fmpq(6, 10))
    [(lo, hi)] = rng.to_dict()["intervals"]
    assert lo == pytest.approx(-math.exp(-0.5), rel=1e-15) and hi == pytest.approx(math.exp(-0.5), rel=1e-15)
    assert ok is True and meets_radius(poly, 5, fmpq(1, 10), fmpq(61, 100)) is False  # e^-0.5 = 0.6065...
    low, high = radius_bounds(5, fmpq(1, 10))
    assert low < to_fmpq(math.exp(-0.5)) * (1 + fmpq(1, 10 ** 14)) and high > low


# -- zero-order hold and sampled loops ------------------------------------------------------------------
from core.analysis.zoh import (  # noqa: E402
    SampledLoop,
    fixed_controller,
    gain_range_curve,
    largest_stable_period,
    sampled_stable_range,
    zoh_equivalent,
)
from core.errors import AnalysisError  # noqa: E402


def _align(a, b) -> tuple[np.ndarray, np.ndarray]:
    size = max(len(a), len(b))
    return np.pad(np.asarray(a, float), (size - len(a), 0)), np.pad(np.asarray(b, float), (size - len(b), 0))


@pytest.mark.parametrize("seed", range(3))
def test_zoh_equivalent_matches_scipy_cont2discrete(seed):
    from scipy.signal import cont2discrete
    rng = np.random.default_rng(seed)
    for _ in range(12):
        n = int(rng.integers(1, 6))
        poles = -rng.uniform(0.1, 5, n) * rng.choice([1, -1], n, p=[0.8, 0.2])  # some unstable poles too
        den = [round(float(x), 4) for x in np.poly(poles)]
        num = [round(float(x), 4) for x in rng.uniform(-2, 2, int(rng.integers(1, n + 2)))]
        ts = round(float(rng.uniform(0.01, 1)), 3)
        ref_num, ref_den, _ = cont2discrete((num, den), ts, method="zoh")  # the outside reference
        hold = zoh_equivalent(num, den, ts)
        mine_num, ref = _align([float(c) for c in hold.num], np.atleast_1d(np.squeeze(ref_num)))
        assert np.allclose(mine_num, ref, atol=1e-10, rtol=1e-10)
        assert np.allclose([float(c) for c in hold.den], ref_den, atol=1e-10, rtol=1e-10)
        assert hold.error_bound < fmpq(1, 10 ** 60)  # 60 digits and more, as stated


def test_zoh_of_an_integrator_is_ts_over_z_minus_one():
    # 1/s behind a hold: Ts/(z - 1) exactly in the limit of the formula (from memory)
    hold = zoh_equivalent([1], [1, 0], fmpq(1, 4))
    assert [float(c) for c in hold.den] == [1.0, -1.0] and float(hold.num[0]) == pytest.approx(0.25, rel=1e-60)


def integral_loop(a: fmpq, scaled: bool) -> SampledLoop:
    """Plant a/(s + a) behind a hold; controller K Ts z/(z - 1) (scaled) or K/(z - 1)."""
    def controller(ts):
        num = [fmpq_poly([0, ts]), 0] if scaled else [fmpq_poly([0, 1])]
        return (ParametricPolynomial.from_coefficients(num, "K"),
                ParametricPolynomial.from_coefficients([1, -1], "K"))
    return SampledLoop(controller, [a], [1, a], parameter="K")


@pytest.mark.parametrize("a, ts", [(3, fmpq(1, 10)), (fmpq(1, 2), fmpq(3, 2)), (10, fmpq(1, 1000))])
def test_first_order_plant_with_integral_control_closed_form(a, ts):
    # Derived here: G(z) = (1 - q)/(z - q) with q = e^(-a Ts). With K Ts z/(z - 1) the characteristic
    # polynomial is z^2 + (K Ts (1 - q) - 1 - q) z + q; Jury's second-order conditions give
    # |q| < 1 (always), K Ts (1 - q) > 0 and 2 (1 + q) - K Ts (1 - q) > 0: 0 < K < 2 (1 + q) / (Ts (1 - q)),
    # lost through z = -1. With K/(z - 1): z^2 - (1 + q) z + q + K (1 - q): 0 < K < 1, the upper end
    # a pair on the circle at cos(theta) = (1 + q)/2.
    q = math.exp(-float(a) * float(ts))
    scaled = sampled_stable_range(integral_loop(fmpq(a), True), ts)
    [(lo, hi)] = scaled.range.to_dict()["intervals"]
    assert lo == 0 and hi == pytest.approx(2 * (1 + q) / (float(ts) * (1 - q)), rel=1e-12)
    assert [e.kind for e in scaled.range.endpoints] == ["z_one", "z_minus_one"] and scaled.certified
    plain = sampled_stable_range(integral_loop(fmpq(a), False), ts)
    [(lo, hi)] = plain.range.to_dict()["intervals"]
    assert lo == 0 and hi == pytest.approx(1.0, rel=1e-12)
    pair = plain.range.endpoints[1]
    assert pair.kind == "unit_circle" and pair.angle == pytest.approx(math.acos((1 + q) / 2), rel=1e-9)
    assert pair.omega == pytest.approx(math.acos((1 + q) / 2) / float(ts), rel=1e-9)


def test_digital_range_tends_to_the_continuous_one_as_ts_shrinks():
    # 1/(s + 1)^3 with gain K: continuous range (-1, 8) (Routh, from memory); sampled with a hold
    # the lower end stays -1 (G(z = 1) = G(s = 0)) and the upper end rises towards 8
    gain = fixed_controller(ParametricPolynomial.from_coefficients([fmpq_poly([0, 1])], "K"),
                            ParametricPolynomial.from_coefficients([1], "K"))
    loop = SampledLoop(gain, [1], [1, 3, 3, 1], parameter="K")
    highs = []
    for ts in (fmpq(1, 2), fmpq(1, 10), fmpq(1, 100), fmpq(1, 1000)):
        [(lo, hi)] = sampled_stable_range(loop, ts).range.to_dict()["intervals"]
        assert lo == pytest.approx(-1.0, rel=1e-12)
        highs.append(hi)
    assert highs == sorted(highs) and highs[-1] < 8 and highs[-1] == pytest.approx(8, rel=2e-3)
    first, second = gain_range_curve(loop, [fmpq(1, 2), fmpq(1, 4)])
    assert first.range.to_dict()["intervals"][0][1] == pytest.approx(highs[0])
    assert highs[0] < second.range.to_dict()["intervals"][0][1] < highs[1]


def test_largest_sample_period_brackets_the_scipy_boundary():
    # 1/(s + 1)^3, K = 4: the bracket's ends checked with scipy's hold equivalent and numpy.roots
    from scipy.signal import cont2discrete

    def gain(ts):
        return ParametricPolynomial.from_coefficients([4]), ParametricPolynomial.from_coefficients([1])
    search = largest_stable_period(SampledLoop(gain, [1], [1, 3, 3, 1]))
    assert search.stable is not None and search.unstable is not None
    assert search.unstable - search.stable <= search.tolerance * search.stable

    def largest_root(ts: float) -> float:
        num, den, _ = cont2discrete(([1], [1, 3, 3, 1]), ts, method="zoh")
        num = np.squeeze(num)
        return float(np.max(np.abs(np.roots(np.polyadd(den, 4 * num)))))
    assert largest_root(float(search.stable) * 0.999) < 1 < largest_root(float(search.unstable) * 1.001)


def test_delay_samples_shrink_the_range():
    # K/(z - 1) around a/(s + a) with one more sample of delay: z^3 - (1 + q) z^2 + q z + K (1 - q);
    # checked against numpy.roots at points inside and just outside the computed range
    loop = integral_loop(fmpq(2), False)
    delayed = SampledLoop(loop.controller, loop.plant_num, loop.plant_den, computation_delay=True, parameter="K")
    r = sampled_stable_range(delayed, fmpq(1, 5))
    [(lo, hi)] = r.range.to_dict()["intervals"]
    q = math.exp(-0.4)
    for k, stable in ((hi * 0.99, True), (hi * 1.01, False), (lo + hi / 2, True)):
        mags = np.abs(np.roots([1, -(1 + q), q, k * (1 - q)]))
        assert bool(np.all(mags < 1)) == stable
    assert hi < 1


@pytest.mark.parametrize("bad", [0, -1, float("inf"), float("nan")])
def test_bad_sample_period_is_e450(bad):
    with pytest.raises(AnalysisError) as err:
        zoh_equivalent([1], [1, 1], bad)
    assert err.value.code == "E450"


def test_improper_plant_and_bad_delay_have_codes():
    with pytest.raises(AnalysisError) as err:
        zoh_equivalent([1, 0, 0], [1, 1], fmpq(1, 10))
    assert err.value.code == "E453"
    with pytest.raises(AnalysisError) as err:
        SampledLoop(integral_loop(fmpq(1), False).controller, [1], [1, 1], delay_samples=-1)
    assert err.value.code == "E454"


# -- the command line -------------------------------------------------------------------------------------
import json  # noqa: E402

from core.cli import main  # noqa: E402


def run_cli(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(["check", *argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_cli_z_polynomial_json_has_the_s_form_and_the_z_keys(capsys):
    code, out, _ = run_cli(capsys, "--poly", "z^2 + (K - 1)*z + 0.25", "--variable", "z", "--param", "K",
                           "--sample-period", "0.1", "--at", "K=1", "--json")
    data = json.loads(out)
    s_code, s_out, _ = run_cli(capsys, "--poly", "s^2 + s + K", "--param", "K", "--json")
    s_data = json.loads(s_out)
    assert code == s_code == 0
    assert set(s_data["stable_range"]) <= set(data["stable_range"])  # the same form as for s
    assert set(s_data["stable_range"]["endpoints"][0]) <= set(data["stable_range"]["endpoints"][0])
    assert data["domain"] == "z" and s_data["domain"] == "s" and data["sample_period"] == 0.1
    # 1 + a1 + a0 = K + 1/4 > 0 and 1 - a1 + a0 = 9/4 - K > 0 (second-order Jury conditions, from memory)
    assert data["stable_range"]["exact_intervals"] == [["-1/4", "9/4"]]
    assert data["stable_range"]["endpoints"][1]["omega"] == pytest.approx(math.pi / 0.1)
    assert data["jury"]["stable"] is True and len(data["jury"]["rows"]) == 2
    assert data["w_routh"]["powers"] == [2, 1, 0] and data["max_sample_period"] is None
    assert data["nominal"]["inside"] == 2 and data["nominal"]["poles"]


def test_cli_max_sample_period_for_a_polynomial_in_ts(capsys):
    # z^2 + (K Ts - 3/2) z + 1/2 at K = 2: 1 - a1 + a0 = 3 - 2 Ts > 0 gives Ts < 3/2 (Jury, from memory)
    code, out, _ = run_cli(capsys, "--poly", "z^2 + (K*Ts - 1.5)*z + 0.5", "--variable", "z", "--param", "K",
                           "--at", "K=2", "--sample-period", "0.1", "--json")
    period = json.loads(out)["max_sample_period"]
    assert code == 0 and period["exact"] == "3/2" and period["method"].startswith("exact")


def test_cli_text_labels_the_w_plane_array_and_the_jury_table(capsys):
    code, out, _ = run_cli(capsys, "--poly", "z^2 - z + K", "--variable", "z", "--param", "K",
                           "--sample-period", "2", "--decay", "0.1")
    assert code == 0
    assert "w-plane Routh array" in out and "  w^2 |" in out and "Jury table" in out
    assert "complex pair crosses the unit circle" in out and "|z| < e^(-sigma Ts)" in out


def test_cli_fail_unstable_reads_the_z_verdict(capsys):
    code, _, _ = run_cli(capsys, "--poly", "z^2 - 3", "--variable", "z", "--fail-unstable")
    assert code == 1


@pytest.mark.parametrize("argv, code", [
    (["--poly", "z^2 + s", "--variable", "z"], "E452"),
    (["--poly", "z + 1/(z - 1)", "--variable", "z"], "E458"),
    (["--poly", "z^2 + K", "--variable", "x"], "E451"),
    (["--poly", "z^2 + K", "--variable", "z", "--param", "K", "--sample-period", "0"], "E450"),
    (["--poly", "z^2 + K", "--variable", "z", "--param", "K", "--sample-period", "-0.5"], "E450"),
    (["--poly", "z^2 + K", "--variable", "z", "--param", "K", "--sample-period", "nan"], "E450"),
    (["--poly", "z^2 + K", "--variable", "z", "--param", "K", "--sample-period", "inf"], "E450"),
    (["--poly", "z^2 + K", "--variable", "z", "--param", "K", "--decay", "1"], "E456"),
    (["--poly", "z^2 + K", "--variable", "z", "--param", "K", "--plane", "K=0..1,T=0..1"], "E457"),
    (["--poly", "s^2 + K", "--param", "K", "--sample-period", "0.1"], "E457"),
    (["--poly", "z^2 + K", "--variable", "z", "--param", "K", "--frequency"], "E457"),
    (["--poly", "(z + 1)^150 * (z - 1)^100", "--variable", "z"], "E459"),
])
def test_cli_bad_sampled_input_is_a_coded_error(capsys, argv, code):
    status, out, err = run_cli(capsys, *argv)
    assert status == 2 and out == "" and err.startswith(f"loopwright-check: {code}")


def test_controller_not_causal_is_e455_and_period_search_needs_the_gain():
    def ahead(ts):
        return ParametricPolynomial.from_coefficients([1, 0, 0]), ParametricPolynomial.from_coefficients([1, -1])
    with pytest.raises(AnalysisError) as err:
        sampled_stable_range(SampledLoop(ahead, [1], [1, 1]), fmpq(1, 10))
    assert err.value.code == "E455"
    with pytest.raises(AnalysisError) as err:
        largest_stable_period(integral_loop(fmpq(1), True))
    assert err.value.code == "E404"


@pytest.mark.filterwarnings("ignore::scipy.signal.BadCoefficients")  # scipy's near-zero leading numerator term
def test_bench_sampled_row_calls_agree_with_scipy():
    # the bench's loop: its K range at Ts = 0.1 against scipy's hold equivalent and numpy.roots
    from scipy.signal import cont2discrete

    from bench import sampled_row
    loop = sampled_row.pi_loop()
    result = sampled_stable_range(loop, sampled_row.SAMPLE_PERIOD)
    [(lo, hi)] = result.range.to_dict()["intervals"]
    num, den, _ = cont2discrete(([float(c) for c in loop.plant_num], [float(c) for c in loop.plant_den]), 0.1,
                                method="zoh")
    num = np.squeeze(num)
    pi_num, pi_den = np.array([1.1, -1.0]), np.array([1.0, -1.0])

    def largest(k: float) -> float:
        return float(np.max(np.abs(np.roots(np.polyadd(np.polymul(pi_den, den), k * np.polymul(pi_num, num))))))
    assert result.certified and largest(hi * 0.999) < 1 < largest(hi * 1.001)
    assert lo == 0 and largest((lo + hi) / 2) < 1
    search = largest_stable_period(loop, nominal=1)
    assert search.stable is not None and search.unstable is not None


def test_cli_sample_period_as_the_tuning_parameter(capsys):
    # z^2 + (2 Ts - 3/2) z + 1/2: 1 - a1 + a0 = 3 - 2 Ts > 0 and 1 + a1 + a0 = 2 Ts > 0 (Jury, from memory)
    code, out, _ = run_cli(capsys, "--poly", "z^2 + (2*Ts - 1.5)*z + 0.5", "--variable", "z", "--param", "Ts",
                           "--sample-period", "0.1", "--json")
    data = json.loads(out)
    assert code == 0 and data["stable_range"]["exact_intervals"] == [["0", "3/2"]]
    assert data["stable_range"]["endpoints"][1]["omega"] == pytest.approx(math.pi / 1.5)  # its own period
    assert data["max_sample_period"]["exact"] == "3/2"
    status, _, err = run_cli(capsys, "--poly", "z^2 + (K*Ts - 1.5)*z + 0.5", "--variable", "z", "--param", "K")
    assert status == 2 and "E404" in err and "--sample-period" in err


def test_large_jury_table_is_omitted_but_the_verdict_stands():
    poly = ParametricPolynomial.from_coefficients([1, fmpq(3, 10)] + [0] * 20 + [fmpq_poly([0, 1]), fmpq(1, 10)], "K")
    table = jury_table(poly, limit_bits=2_000)
    assert table.omitted and table.rows == [] and table.to_dict(fmpq(0))["stable"] is None
    # K = 0: z^22 (z + 3/10) + 1/10, numpy.roots as the reference for the w-plane verdict
    assert schur_stable(poly.at(0), poly.degree) == bool(np.all(np.abs(np.roots([float(c) for c in poly.at(0)])) < 1))
    assert jury_table(poly).stable_at(0) == schur_stable(poly.at(0), poly.degree)

"""The robust range against toleranced parameters (core.analysis.robust), its file field, command
line and errors. References: numpy.roots on dense samples of the tolerance box, the Hurwitz
conditions in closed form (from memory), Kharitonov's theorem and the edge theorem against each
other."""
import itertools
import json
import math

import numpy as np
import pytest
from flint import fmpq

from core.algebra.expression import expression_parameters, parse_polynomial, to_mpoly
from core.algebra.polynomial import mpoly_context
from core.analysis.report import check_polynomial, check_project
from core.analysis.robust import robust_range
from core.cli import main
from core.errors import AnalysisError, ModelError, ProjectFileError
from core.io.project_file import dumps_project, loads_project, project_to_dict
from core.model.diagram import Diagram, Node, Parameter


def mpoly(text):
    names = sorted(expression_parameters(text))
    return to_mpoly(parse_polynomial(text, where="test", declared=set(names)), mpoly_context(names))


def numpy_stable(coeffs, degree):
    """Reference: every root of numpy.roots in the open left half plane, the degree kept."""
    c = np.trim_zeros(np.asarray(coeffs, dtype=float), "f")
    return len(c) - 1 == degree and bool(np.all(np.roots(c).real < 0))


def box(tol, per_axis):
    axes = [np.linspace(float(lo), float(hi), per_axis) for lo, hi in tol.values()]
    return [dict(zip(tol, point)) for point in itertools.product(*axes)]


def check_against_sampling(r, coeffs, degree, tol, ks, band, per_axis=60):
    """Sampling may only shrink the set found stable, never grow it: each k the engine calls robust
    is stable at every sample (numpy.roots); each k farther than ``band`` from every robust end that
    the engine rejects is unstable at some sample."""
    samples = box(tol, per_axis)
    ends = [e.value for e in r.endpoints]
    checked_in = checked_out = 0
    for k in ks:
        if any(abs(k - e) < band for e in ends):
            continue
        stable_everywhere = all(numpy_stable(coeffs(k, **q), degree) for q in samples)
        inside = r.contains(float(k))
        assert inside == stable_everywhere, (k, inside)
        checked_in += inside
        checked_out += not inside
    assert checked_in and checked_out  # the grid of k saw both sides


# -- one toleranced parameter (exact) -----------------------------------------------------------
def test_motor_time_constant_against_sampling():
    # invented: P control of a motor 1/(s (T s + 1)(0.5 s + 1)), T = 0.08 .. 0.12 s
    tol = {"T": (fmpq(2, 25), fmpq(3, 25))}
    r = robust_range(mpoly("s*(T*s+1)*(0.5*s+1) + K"), "K", tol, {})
    assert r.method == "exact" and r.exact
    coeffs = lambda k, T: [0.5 * T, T + 0.5, 1, k]  # noqa: E731
    check_against_sampling(r, coeffs, 3, tol, np.linspace(-1, 30, 125), band=0.05)
    # Hurwitz for a3 s^3 + a2 s^2 + a1 s + a0: a2 a1 > a3 a0 (Routh 1877, from memory):
    # K < (T + 0.5) / (0.5 T) = 2 + 1/T, smallest at T = 0.12: 2 + 25/3 = 31/3
    assert r.to_dict()["exact_intervals"] == [["0", "31/3"]]
    assert r.endpoints[-1].worst_case_exact == {"T": "3/25"} and r.endpoints[0].to_dict()["every_value"]


def test_turning_point_inside_the_tolerance():
    # invented: s^3 + s^2 + (1 + (q-1)^2) s + K, q in [0, 2]; Hurwitz (from memory): K < 1 + (q-1)^2,
    # least at q = 1, inside the tolerance: the end comes from a double root in q, not an end of it
    tol = {"q": (fmpq(0), fmpq(2))}
    r = robust_range(mpoly("s^3 + s^2 + (1 + (q-1)^2)*s + K"), "K", tol, {})
    assert r.to_dict()["exact_intervals"] == [["0", "1"]]
    assert r.endpoints[-1].worst_case["q"] == pytest.approx(1.0, abs=1e-6)
    coeffs = lambda k, q: [1, 1, 1 + (q - 1) ** 2, k]  # noqa: E731
    check_against_sampling(r, coeffs, 3, tol, np.linspace(-0.5, 3, 71), band=0.02, per_axis=201)


def test_pi_loop_degree_five_against_sampling():
    # invented: PI control Kp (s + 2) / s of (T s + 1)(s + 1)^2 (0.2 s + 1), T = 0.3 .. 0.6
    tol = {"T": (fmpq(3, 10), fmpq(3, 5))}
    r = robust_range(mpoly("s*(T*s+1)*(s+1)^2*(0.2*s+1) + K*(s+2)"), "K", tol, {})

    def coeffs(k, T):
        loop = np.polymul(np.polymul([T, 1], [1, 2, 1]), [0.2, 1, 0])
        return np.polyadd(loop, [k, 2 * k])
    check_against_sampling(r, coeffs, 5, tol, np.linspace(-2, 8, 101), band=0.02)


def test_toleranced_parameter_out_of_the_loop_changes_nothing():
    r = check_polynomial("s^2 + 3s + K", "K", tolerances={}).robust_range
    assert r is None
    robust = robust_range(mpoly("s^2 + 3s + K"), "K", {"T": (fmpq(1), fmpq(2))}, {})
    assert robust.to_dict()["exact_intervals"] == [["0", None]] and robust.notes


# -- several toleranced parameters ----------------------------------------------------------------
def test_third_order_interval_polynomial_textbook():
    # from memory: a third-order interval polynomial with positive coefficient intervals is stable
    # for every member iff a2_min a1_min > a3_max a0_max (a single Kharitonov polynomial suffices
    # at degree 3). Here a3 in [1, 3/2], a2 in [2, 4], a1 in [1, 3], a0 = K: 0 < K < 2/(3/2) = 4/3
    tol = {"a": (fmpq(0), fmpq(1, 2)), "b": (fmpq(-1), fmpq(1)), "c": (fmpq(-1), fmpq(1))}
    r = robust_range(mpoly("(1+a)*s^3 + (3+b)*s^2 + (2+c)*s + K"), "K", tol, {})
    assert r.method == "kharitonov"
    assert r.to_dict()["exact_intervals"] == [["0", "4/3"]]
    assert r.endpoints[-1].worst_case_exact == {"a": "1/2", "b": "-1", "c": "-1"}


@pytest.mark.parametrize("text", [
    "s^4 + (3+a)*s^3 + (4+b)*s^2 + (2+c)*s + K",           # invented interval quartic
    "(2+a)*s^5 + 6*s^4 + (9+b)*s^3 + (7+c)*s^2 + 3*s + K + a0",
])
def test_kharitonov_and_edge_theorem_agree(text):
    # Kharitonov (1978) and the edge theorem (1988) both apply to an interval polynomial: the same set
    names = sorted(expression_parameters(text) - {"K"})
    tol = {n: (fmpq(-1, 2), fmpq(1, 2)) for n in names}
    poly = mpoly(text)
    by_kharitonov = robust_range(poly, "K", tol, {})
    by_edges = robust_range(poly, "K", tol, {}, method="edge-theorem")
    assert (by_kharitonov.method, by_edges.method) == ("kharitonov", "edge-theorem")
    assert by_kharitonov.to_dict()["exact_intervals"] == by_edges.to_dict()["exact_intervals"]


def test_edge_theorem_against_sampling():
    # invented: a enters two coefficients, b multiplies the gain: affine, not an interval polynomial
    tol = {"a": (fmpq(0), fmpq(1)), "b": (fmpq(-1, 4), fmpq(1, 4))}
    r = robust_range(mpoly("s^3 + (2+a)*s^2 + (1+a+b)*s + K*(1+b)"), "K", tol, {})
    assert r.method == "edge-theorem"
    coeffs = lambda k, a, b: [1, 2 + a, 1 + a + b, k * (1 + b)]  # noqa: E731
    check_against_sampling(r, coeffs, 3, tol, np.linspace(-1, 4, 51), band=0.04, per_axis=21)


def test_products_are_sampled_and_say_so():
    # invented: s^3 + s^2 + (1 + a b) s + K, a, b in [1, 2]: Hurwitz (from memory) K < 1 + a b, least
    # 2 at a = b = 1
    tol = {"a": (fmpq(1), fmpq(2)), "b": (fmpq(1), fmpq(2))}
    r = robust_range(mpoly("s^3 + s^2 + (1 + a*b)*s + K"), "K", tol, {})
    d = r.to_dict()
    assert (d["method"], d["exact"]) == ("sampled", False) and d["samples"] and "estimated" in d["reason"]
    coeffs = lambda k, a, b: [1, 1, 1 + a * b, k]  # noqa: E731
    for k in np.linspace(0.05, 1.95, 20):  # stable at every numpy sample: the estimate keeps it
        assert all(numpy_stable(coeffs(k, **q), 3) for q in box(tol, 15))
        assert r.contains(float(k))


# -- bad input ------------------------------------------------------------------------------------
@pytest.mark.parametrize("tolerances, code", [
    ({"T": (2, 1)}, "E420"), ({"T": (1, 1)}, "E420"), ({"T": (float("nan"), 1)}, "E420"),
    ({"K": (1, 2)}, "E421"), ({"X": (1, 2)}, "E422"),
])
def test_bad_tolerances(tolerances, code):
    with pytest.raises(AnalysisError) as err:
        check_polynomial("T*s^2 + s + K", "K", tolerances=tolerances)
    assert err.value.code == code


def test_model_refuses_bad_tolerances():
    d = Diagram()
    with pytest.raises(ModelError) as err:
        d.set_parameter(Parameter("T", 0.1, 0, 1, (0.2, 0.1)))
    assert err.value.code == "E306"
    d.set_parameter(Parameter("T", 0.1, 0, 1, (0.08, 0.12)))
    with pytest.raises(ModelError) as err:
        d.set_tuning_parameter("T")
    assert err.value.code == "E307"
    d.set_parameter(Parameter("K", 1, 0, 10))
    d.set_tuning_parameter("K")
    with pytest.raises(ModelError) as err:
        d.set_parameter(Parameter("K", 1, 0, 10, (0.5, 2)))
    assert err.value.code == "E307" and d.parameters["K"].tolerance is None


@pytest.mark.parametrize("argv, words", [
    (["--tolerance", "T=0.2..0.1"], "E420"), (["--tolerance", "K=1..2"], "E421"),
    (["--tolerance", "T=0.1"], "E501"), (["--tolerance", "T=a..b"], "E112"),
])
def test_cli_bad_tolerance(argv, words, capsys):
    assert main(["check", "--poly", "T*s^2 + s + K", "--param", "K", "--at", "K=1", *argv]) == 2
    assert words in capsys.readouterr().err


# -- project file and projects --------------------------------------------------------------------
def motor_project(tolerance=(0.08, 0.12)):
    d = Diagram(name="motor")
    for node in (Node("r", "input"), Node("e", "sum"), Node("C", "block", num="K", den="1"),
                 Node("P", "block", num="1", den="s*(T*s+1)*(0.5*s+1)"), Node("y", "output")):
        d.add_node(node)
    for a, b, port in (("r", "e", 0), ("e", "C", 0), ("C", "P", 0), ("P", "y", 0), ("P", "e", 1)):
        d.connect(a, b, port)
    d.set_parameter(Parameter("K", 2, 0, 20))
    d.set_parameter(Parameter("T", 0.1, 0.01, 1, tolerance))
    d.set_tuning_parameter("K")
    d.set_analysis(input="r", output="y")
    return d


def test_file_round_trip_and_migration():
    d = motor_project()
    again = loads_project(dumps_project(d), "motor.loop.json")
    assert again.parameters["T"].tolerance == (0.08, 0.12)
    assert project_to_dict(again) == project_to_dict(d)
    old = project_to_dict(motor_project(None))  # a version-3 file: no tolerance field existed
    old["version"] = 3
    migrated = loads_project(json.dumps(old), "old.loop.json")
    assert migrated.parameters["T"].tolerance is None
    assert project_to_dict(migrated) == project_to_dict(motor_project(None))


@pytest.mark.parametrize("tolerance, code", [({"low": 0.2, "high": 0.1}, "E205"), ({"low": 0.1}, "E204"),
                                             ({"low": 0.1, "high": 0.2, "width": 1}, "E205")])
def test_file_refuses_bad_tolerance(tolerance, code):
    data = project_to_dict(motor_project(None))
    data["parameters"][1]["tolerance"] = tolerance
    with pytest.raises(ProjectFileError) as err:
        loads_project(json.dumps(data), "bad.loop.json")
    assert err.value.code == code


def test_file_refuses_toleranced_tuning_parameter():
    data = project_to_dict(motor_project())
    data["tuning_parameter"] = "T"
    with pytest.raises(ProjectFileError) as err:
        loads_project(json.dumps(data), "bad.loop.json")
    assert err.value.code == "E205" and "tolerance" in err.value.message


def test_project_robust_range_from_the_file_and_the_command_line(tmp_path, capsys):
    report = check_project(motor_project())
    # as in test_motor_time_constant_against_sampling: K < 2 + 1/T at T = 0.12 (from memory)
    assert report.robust_range.to_dict()["exact_intervals"] == [["0", "31/3"]]
    path = tmp_path / "motor.loop.json"
    path.write_text(dumps_project(motor_project()), "utf-8")
    assert main(["check", str(path), "--json", "--tolerance", "T=0.05..0.1"]) == 0
    robust = json.loads(capsys.readouterr().out)["robust_range"]
    assert robust["exact_intervals"] == [["0", "12"]] and robust["method"] == "exact"  # 2 + 1/0.1
    assert robust["endpoints"][-1]["worst_case_exact"] == {"T": "1/10"}
    assert main(["check", str(path)]) == 0
    assert "Robust range" in capsys.readouterr().out
    assert main(["check", str(path), "--json", "--at", "T=0.2"]) == 0  # the nominal outside the tolerance
    assert "outside its tolerance" in json.loads(capsys.readouterr().out)["robust_range"]["notes"][0]


# -- the bench workloads (also a check that the worst case really is one) -------------------------
def _numpy_coeffs(poly, values):
    """Float coefficients of an exact polynomial at float values (the reference then is numpy.roots)."""
    names = poly.context().names()
    degree = poly.degrees()[0]
    out = np.zeros(degree + 1)
    for exps, c in poly.to_dict().items():
        out[degree - int(exps[0])] += float(c) * np.prod([values[n] ** int(e) for n, e in zip(names[1:], exps[1:])])
    return out


@pytest.mark.parametrize("workload", ["one_toleranced", "five_affine"])
def test_bench_workloads_worst_case_is_the_limit(workload):
    from bench import robust_row

    poly, tol = getattr(robust_row, workload)()
    r = robust_range(poly, "K", tol, {})
    assert r.method == ("exact" if workload == "one_toleranced" else "edge-theorem")
    (lo, hi), = r.to_dict()["intervals"]
    degree = poly.degrees()[0]
    rng = np.random.default_rng(3)
    corners = [dict(zip(tol, c)) for c in itertools.product(*[(float(a), float(b)) for a, b in tol.values()])]
    randoms = [{n: rng.uniform(float(a), float(b)) for n, (a, b) in tol.items()} for _ in range(30)]
    for q in corners + randoms:  # numpy.roots: stable inside the robust range at every sample
        assert numpy_stable(_numpy_coeffs(poly, {"K": (lo + hi) / 2, **q}), degree)
    worst = {n: (float(a) + float(b)) / 2 for n, (a, b) in tol.items()} | r.endpoints[-1].worst_case
    assert numpy_stable(_numpy_coeffs(poly, {"K": hi * (1 - 1e-4), **worst}), degree)
    assert not numpy_stable(_numpy_coeffs(poly, {"K": hi * (1 + 1e-4), **worst}), degree)


@pytest.mark.parametrize("text, tolerance, expected", [
    # invented, Hurwitz by hand (from memory): K < 1 + (q-1)^2 least at q = 2 on [2, 3]; the turning
    # value K = 1 (double root q = 1, outside) lies inside the robust range, which stays one interval
    ("s^3 + s^2 + (1 + (q-1)^2)*s + K", (2, 3), [["0", "2"]]),
    # the same with K^2/2: turning values +-sqrt(2) are irrational, still inside; K = 0 is a double root
    # of the constant term, so two intervals
    ("s^3 + s^2 + (1 + (q-1)^2)*s + K^2/2", (2, 3), [["-2", "0"], ["0", "2"]]),
])
def test_turning_values_outside_the_tolerance_do_not_split_the_range(text, tolerance, expected):
    r = robust_range(mpoly(text), "K", {"q": tuple(fmpq(v) for v in tolerance)}, {})
    assert r.to_dict()["exact_intervals"] == expected


@pytest.mark.parametrize("seed", range(8))
def test_random_loops_one_tolerance_against_sampling(seed):
    # invented, seeded: (s + 1 + a q)(s^2 + (1 + b q) s + 2 + c q^2)(s + d) + K (m s + 1), q in
    # [1/2, 2] (stable at K = 0); reference numpy.roots (polymul) on 50 values of q
    a, b, c, d, m = (int(v) for v in np.random.default_rng(seed).integers(0, 4, size=5))
    d += 1
    text = f"(s + 1 + {a}*q)*(s^2 + (1 + {b}*q)*s + 2 + {c}*q^2)*(s + {d}) + K*({m}*s + 1)"
    tol = {"q": (fmpq(1, 2), fmpq(2))}
    r = robust_range(mpoly(text), "K", tol, {})

    def coeffs(k, q):
        loop = np.polymul(np.polymul([1, 1 + a * q], [1, 1 + b * q, 2 + c * q * q]), [1, d])
        return np.polyadd(loop, [m * k, k])
    ends = [e.value for e in r.endpoints]
    assert r.intervals and all(math.isfinite(e) for e in ends)
    span = max(abs(e) for e in ends)
    samples = box(tol, 50)
    for k in np.linspace(-1.5 * span, 1.5 * span, 61):
        if any(abs(k - e) < 1e-3 * span for e in ends):
            continue
        assert r.contains(float(k)) == all(numpy_stable(coeffs(k, **q), 4) for q in samples), (text, k)


def test_a_boundary_touching_the_tolerance_at_one_irrational_value():
    # invented: a0 = (q - 1/2)^2 + (K^2 - 2)^2 vanishes only at q = 1/2, K = +-sqrt(2) (by hand):
    # inside the tolerance [0, 1] those two values are not robust; with q in [0, 1] shifted to
    # (q - 3/2) the boundary never meets the tolerance and every K is robust
    touching = robust_range(mpoly("s^2 + s + (q-1/2)^2 + (K^2-2)^2"), "K", {"q": (fmpq(0), fmpq(1))}, {})
    assert len(touching.intervals) == 3 and [round(e.value, 12) for e in touching.endpoints] == [
        round(-2 ** 0.5, 12), round(2 ** 0.5, 12)]
    assert touching.contains(0) and touching.contains(2) and touching.notes
    clear = robust_range(mpoly("s^2 + s + (q-3/2)^2 + (K^2-2)^2"), "K", {"q": (fmpq(0), fmpq(1))}, {})
    assert clear.to_dict()["exact_intervals"] == [[None, None]] and not clear.notes

"""Whole-report checks: decay ranges, hidden modes, margins, nominal poles, against numpy and scipy."""
import math

import numpy as np
import pytest
from scipy import signal

from core.analysis.report import check_polynomial, check_project, decay_sigma
from core.errors import AnalysisError
from core.model.diagram import Diagram, Node, Parameter


def test_decay_range_agrees_with_numpy_at_interval_midpoints():
    # s^3 + 3s^2 + 2s + K with every root left of Re s = -0.25; numpy.roots is the reference
    r = check_polynomial("s^3 + 3s^2 + 2s + K", parameter="K", at={"K": 0.5}, decay=0.25)
    intervals = r.decay.range.to_dict()["intervals"]
    assert intervals, "some K meets sigma = 0.25"
    for lo, hi in intervals:
        lo = -50.0 if lo is None else lo
        hi = 50.0 if hi is None else hi
        mid = (lo + hi) / 2
        assert np.max(np.roots([1, 3, 2, mid]).real) < -0.25
        for outside in (lo - 1e-3, hi + 1e-3):
            assert np.max(np.roots([1, 3, 2, outside]).real) > -0.25 - 1e-6
    assert r.decay.nominal_ok == bool(np.max(np.roots([1, 3, 2, 0.5]).real) < -0.25)


def test_time_to_half_amplitude_gives_ln2_over_t():
    # an envelope exp(-sigma t) halves in T when sigma = ln 2 / T (definition)
    sigma, note = decay_sigma("half_time", 2.0)
    assert math.isclose(float(sigma), math.log(2) / 2.0, rel_tol=1e-14)
    assert "ln 2" in note


def unity_loop(controller, plant, params=()):
    d = Diagram("test loop")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"),
                 Node("C", "block", role="controller", num=controller[0], den=controller[1]),
                 Node("P", "block", role="plant", num=plant[0], den=plant[1]),
                 Node("b", "branch"), Node("y", "output")):
        d.add_node(node)
    for a, b, port in (("r", "e", 0), ("e", "C", 0), ("C", "P", 0), ("P", "b", 0), ("b", "y", 0), ("b", "e", 1)):
        d.connect(a, b, port)
    for p in params:
        d.set_parameter(p)
    d.set_analysis(input="r", output="y")
    return d


def test_cancelled_unstable_pole_is_reported_as_hidden_mode():
    # controller zero at s = 1 cancels the plant pole at s = 1: the input-output transfer function
    # looks stable, but the loop's characteristic polynomial keeps (s - 1) (internal stability,
    # standard textbook argument, from memory)
    d = unity_loop(("s-1", "s+2"), ("1", "s-1"))
    r = check_project(d)
    assert any(abs(h.pole.re - 1) < 1e-12 and h.pole.im == 0 and h.unstable for h in r.hidden_modes)
    assert not r.nominal.stable and r.nominal.rhp == 1
    assert any("hidden mode" in w and "UNSTABLE" in w for w in r.warnings)


def test_nominal_poles_match_scipy_closed_loop():
    # closed loop of K (s+3) / (s (s+1)(s+2)(s+4)) in unity feedback; scipy.signal is the reference
    d = unity_loop(("K*(s+3)", "1"), ("1", "s*(s+1)*(s+2)*(s+4)"), [Parameter("K", 5.0, 0.0, 50.0)])
    d.set_tuning_parameter("K")
    r = check_project(d)
    num = 5 * np.array([1, 3])
    den = np.polymul(np.polymul([1, 0], [1, 1]), np.polymul([1, 2], [1, 4]))
    closed = signal.TransferFunction(num, np.polyadd(den, num))
    ref = sorted(closed.poles, key=lambda z: (z.real, z.imag))
    got = sorted((complex(p["re"], p["im"]) for p in r.to_dict()["poles"]), key=lambda z: (z.real, z.imag))
    assert np.allclose(got, ref, atol=1e-9)
    assert r.transfer_function is not None


def test_margins_are_ratios_to_the_limits():
    r = check_polynomial("s^3 + 3s^2 + 2s + K", parameter="K", at={"K": 2})
    m = r.margins.to_dict()
    rise = [v for k, v in m.items() if k.startswith("rise") and "db" not in k.lower() and v is not None]
    assert rise and math.isclose(rise[0], 3.0)  # 6 / 2
    rise_db = [v for k, v in m.items() if k.startswith("rise") and "db" in k.lower() and v is not None]
    assert rise_db and math.isclose(rise_db[0], 20 * math.log10(3.0))


def test_parameter_without_value_is_named():
    with pytest.raises(AnalysisError) as err:
        check_polynomial("s^2 + a s + b", parameter="a")
    assert err.value.code == "E404" and "b" in err.value.message


def test_no_nominal_when_tuning_parameter_has_no_value():
    r = check_polynomial("s^2 + a s + 1", parameter="a")
    assert r.nominal is None
    assert r.stable_range.to_dict()["intervals"] == [[0.0, None]]  # s^2 + a s + 1 stable iff a > 0


def test_factor_cancelled_inside_one_typed_field_is_still_a_mode():
    # plant typed as one field "(s-1)/((s-1)(s+3))": the factor s - 1 must stay in the loop
    # (internal stability: every typed denominator is a mode, textbook argument, from memory)
    d = unity_loop(("2", "1"), ("(s-1)/((s-1)*(s+3))", "1"))
    r = check_project(d)
    assert any(abs(h.pole.re - 1) < 1e-12 and h.unstable for h in r.hidden_modes)
    assert not r.nominal.stable


def test_first_column_signs_are_certified_beyond_the_float_range():
    # 10^400 overflows a double (IEEE 754 range ends near 1.8e308); ball arithmetic still gives the
    # sign, checked against exact rational evaluation (fmpq); an exact zero gives no sign at all
    from flint import fmpq, fmpq_poly

    from core.analysis.pipeline import FirstColumnSigns
    from core.analysis.routh import RationalFunction
    for coeffs in ([10**400, 1], [-10**400, 1], [1, -10**400], [fmpq(1, 3), -1]):
        p = fmpq_poly(coeffs)
        exact = p(fmpq(1, 2))
        assert FirstColumnSigns([RationalFunction(p)]).at(0.5) == [1 if exact > 0 else -1]
    assert FirstColumnSigns([RationalFunction(fmpq_poly([-1, 2]))]).at(0.5) is None  # 2*(1/2) - 1 = 0

"""Hard edges of the exact engine: candidate values closer than double precision, degenerate
nominal values, repeated crossing pairs. References: hand derivation, mpmath at 60 digits, sympy."""
from __future__ import annotations

import mpmath
import pytest
from flint import fmpq

from core.analysis.report import check_polynomial

Q = fmpq


def _range(text):
    return check_polynomial(text, parameter="K").stable_range


def test_two_rational_endpoints_closer_than_double_spacing():
    # s^2 + a1 s + a0 is Hurwitz iff a1, a0 > 0 (hand derivation): K > 3 and K > 3 + 1e-20
    r = _range("s^2 + (K-3)*s + K - 3 - 1e-20")
    assert r.to_dict()["exact_intervals"] == [["300000000000000000001/100000000000000000000", None]]
    assert not r.contains(Q(3) + Q(1, 10 ** 21)) and r.contains(Q(3) + Q(2, 10 ** 20))


def test_rationals_1e16_apart_and_a_rational_next_to_sqrt2():
    # hand derivation as above: K > 1/3 + 1e-16; and K^2 > 2 with K > 1.414213562373095048,
    # which lies below sqrt(2) (mpmath at 60 digits), so the range starts at sqrt(2)
    r = _range("s^2 + (K-1/3)*s + K - 1/3 - 1e-16")
    assert r.to_dict()["exact_intervals"] == [["10000000000000003/30000000000000000", None]]
    r = _range("s^2 + (K^2-2)*s + K - 1.414213562373095048")
    mpmath.mp.dps = 60
    assert mpmath.sqrt(2) > mpmath.mpf("1.414213562373095048")
    (lo, hi), = r.intervals
    assert hi is None and lo.text("K").startswith("root of K^2 - 2")
    assert not r.contains(Q(1414213562373095048, 10 ** 18))
    assert r.contains(Q(1414213562373095049, 10 ** 18))  # just above sqrt(2) = 1.41421356237309504880...


def test_two_irrational_endpoints_closer_than_double_spacing():
    # s^2 + (1e40 (K-1)^2 - 2) s + 1 is Hurwitz iff |K - 1| > sqrt(2) 1e-20 (hand derivation)
    r = _range("s^2 + (1e40*(K-1)^2 - 2)*s + 1")
    (a, b), (c, d) = r.intervals
    assert a is None and d is None
    mpmath.mp.dps = 60
    gap = 2 * mpmath.sqrt(2) * mpmath.mpf(10) ** -20
    width = Q(1, 10 ** 50)
    b, c = b.narrowed(width), c.narrowed(width)
    assert abs(mpmath.mpf(int(c.lo.p)) / int(c.lo.q) - mpmath.mpf(int(b.lo.p)) / int(b.lo.q) - gap) < 1e-45
    for k, inside in ((1, False), (Q(1) - Q(1, 10 ** 20), False), (Q(1) + Q(1, 10 ** 20), False),
                      (Q(1) - Q(2, 10 ** 20), True), (Q(1) + Q(2, 10 ** 20), True)):
        assert r.contains(k) is inside


def test_repeated_pair_crossing_frequency_is_exact():
    # (s^2 + (K^2-2) s + 1)^3 at K = ±sqrt(2) is (s^2+1)^3: the triple pair sits at ±j (hand)
    r = _range("(s^2 + (K^2-2)*s + 1)^3")
    omegas = [e.omega for e in r.endpoints]
    assert len(omegas) == 2 and all(w == pytest.approx(1.0, rel=1e-14) for w in omegas)
    # a pair at ±j sqrt(a0) with a0 = sqrt(2) - 1.414213562373095048 (mpmath at 60 digits)
    mpmath.mp.dps = 60
    expected = float(mpmath.sqrt(mpmath.sqrt(2) - mpmath.mpf("1.414213562373095048")))
    (e,) = _range("s^2 + (K^2-2)*s + K - 1.414213562373095048").endpoints
    assert e.kind == "crossing" and e.omega == pytest.approx(expected, rel=1e-12)


def test_polynomial_vanishing_at_the_nominal_value_is_degenerate_not_a_crash():
    # (1-K)(s+1)^2 is the zero polynomial at K = 1 (hand): no root count exists there
    r = check_polynomial("(1-K)*(s^2+2*s+1)", parameter="K", at={"K": 1}, decay=1)
    assert r.nominal.stable is False and r.nominal.poles == []
    assert any("degenerate at K = 1" in n for n in r.nominal.notes)
    assert r.decay.nominal_ok is False and not r.stable_range.contains(1)


def test_polynomial_vanishing_at_fixed_values_is_e403_naming_them():
    from core.errors import AnalysisError
    with pytest.raises(AnalysisError) as err:  # (1-a)(...) at a = 1 is zero for every K (hand)
        check_polynomial("(1-a)*(s^2+2*s+K)", parameter="K", at={"a": 1})
    assert err.value.code == "E403" and "a = 1" in err.value.message


def test_decay_verdict_at_nominal_agrees_with_the_exact_range():
    # (s + 1 + 1e-20)(s + 2) + K at K = 0: roots -1 - 1e-20 and -2, both left of -1 (hand), so sigma = 1
    # is met; the range starts at K = -1e-20 (where the shifted polynomial's constant term vanishes)
    r = check_polynomial("(s+1+1e-20)*(s+2)+K", parameter="K", at={"K": 0}, decay=1)
    assert r.decay.range.to_dict()["exact_intervals"] == [["-1/100000000000000000000", None]]
    assert r.decay.nominal_ok is True and r.decay.range.contains(0)


@pytest.mark.parametrize("root, met", [("0.6931471805599453", False), ("0.6931471805599454", True)])
def test_time_to_half_compares_with_ln2_exactly(root, met):
    # a pole at s = -c halves in ln 2 / c: T = 1 is met iff c > ln 2 = 0.69314718055994530942...
    # (mpmath at 60 digits); 15-digit ln 2 would call both met
    mpmath.mp.dps = 60
    assert (mpmath.mpf(root) > mpmath.log(2)) is met
    assert check_polynomial(f"s + {root}", decay=1, decay_mode="half_time").decay.nominal_ok is met

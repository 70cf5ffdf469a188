"""Step responses and their metrics, checked against scipy.signal and textbook closed forms."""
from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy import signal

from core.analysis.time_response import step_metrics, step_response, transfer_from_diagram, transfer_from_text
from core.errors import AnalysisError
from core.model.diagram import Diagram, Node, Parameter


def second_order(zeta: float, wn: float):
    """wn^2 / (s^2 + 2 zeta wn s + wn^2) as a typed pair."""
    return transfer_from_text(f"{wn * wn!r}", f"s^2 + {2 * zeta * wn!r}*s + {wn * wn!r}")


@pytest.mark.parametrize("zeta", [0.1, 0.3, 0.5, 0.7, 0.9])
def test_overshoot_matches_closed_form(zeta):
    # Percent overshoot of the standard second-order system: 100 exp(-pi zeta / sqrt(1 - zeta^2))
    # (standard texts, e.g. Ogata, Nise; from memory).
    expected = 100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta * zeta))
    r = step_response(second_order(zeta, 2.0))
    assert r.stable
    assert r.metrics.overshoot == pytest.approx(expected, rel=2e-3, abs=1e-3)
    # peak time pi / (wn sqrt(1 - zeta^2)) (same sources, from memory)
    assert r.metrics.peak_time == pytest.approx(math.pi / (2.0 * math.sqrt(1 - zeta * zeta)), rel=2e-3)


@pytest.mark.parametrize("zeta", [0.2, 0.4, 0.6])
def test_settling_time_near_four_over_sigma(zeta):
    # 2 % settling ~ 4 / (zeta wn): a rule of thumb from the envelope (common practice). The true
    # settling time differs by the envelope's factor 1/sqrt(1 - zeta^2) and where the last peak
    # falls, so only a loose band is asserted.
    wn = 3.0
    r = step_response(second_order(zeta, wn))
    assert r.metrics.settling_time == pytest.approx(4 / (zeta * wn), rel=0.3)


def test_rise_time_falls_as_natural_frequency_rises():
    # Rise time scales as 1/wn for fixed zeta (time scaling of the standard form; from memory).
    rises = [step_response(second_order(0.5, wn)).metrics.rise_time for wn in (0.5, 1.0, 2.0, 4.0)]
    assert all(a > b for a, b in itertools.pairwise(rises))
    assert rises[0] / rises[1] == pytest.approx(2.0, rel=5e-3)


def test_metrics_agree_with_raw_scipy_step():
    # The same third-order loop simulated by scipy.signal.step directly; overshoot, final value
    # and 10-90 % rise time computed here from scipy's raw samples, independently of core.
    num, den = [2.0], [1.0, 3.0, 2.0, 2.0]  # K / (s^3 + 3 s^2 + 2 s + K) at K = 2
    r = step_response(transfer_from_text("2", "s^3 + 3s^2 + 2s + 2"))
    _, same = signal.step((num, den), T=r.t)
    assert r.y == pytest.approx(same, abs=1e-9)
    t = np.linspace(0, r.t[-1], 20001)  # a finer grid for the independent metrics
    _, y = signal.step((num, den), T=t)
    final = num[-1] / den[-1]
    assert r.metrics.overshoot == pytest.approx((y.max() - final) / final * 100, rel=1e-3)
    t10 = t[np.argmax(y >= 0.1 * final)]
    t90 = t[np.argmax(y >= 0.9 * final)]
    assert r.metrics.rise_time == pytest.approx(t90 - t10, abs=3 * (t[1] - t[0]) + 1e-3)
    assert r.metrics.peak_time == pytest.approx(t[np.argmax(y)], abs=0.01)


def test_final_value_theorem_matches_last_samples():
    # Final value theorem: y(inf) = G(0) for a stable loop (textbook, from memory); the simulation's
    # last samples (8 time constants of the slowest pole) must agree.
    tr = transfer_from_text("3*s + 5", "s^3 + 4s^2 + 6s + 4")
    r = step_response(tr)
    assert r.metrics.final_value == pytest.approx(5 / 4)
    assert r.y[-20:] == pytest.approx(np.full(20, 5 / 4), rel=2e-3)


@pytest.mark.parametrize("kp", [0.5, 2.0, 9.0])
def test_type_zero_unity_loop_error(kp):
    # Unity feedback around a type-0 plant Kp / ((s+1)(s+2)/2): steady-state error to a unit step
    # is 1 / (1 + Kp), Kp the position constant G(0) (textbook, from memory).
    d = Diagram("type zero loop")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"),
                 Node("P", "block", role="plant", num="2*Kp", den="(s+1)*(s+2)"),
                 Node("b", "branch"), Node("y", "output")):
        d.add_node(node)
    for a, b, port in (("r", "e", 0), ("e", "P", 0), ("P", "b", 0), ("b", "y", 0), ("b", "e", 1)):
        d.connect(a, b, port)
    d.set_parameter(Parameter("Kp", kp, 0.1, 20.0))
    d.set_analysis(input="r", output="y")
    r = step_response(transfer_from_diagram(d))
    assert r.metrics.steady_state_error == pytest.approx(1 / (1 + kp))
    assert 1 - r.y[-1] == pytest.approx(1 / (1 + kp), rel=5e-3)


def test_disturbance_input_error_is_its_final_value():
    # A load disturbance added at the plant input of C = K, P = 1/(s(s+1)(s+2)): y/d = P / (1 + K P)
    # = 1 / (s^3 + 3 s^2 + 2 s + K), final value 1/K by the final value theorem (from memory).
    d = Diagram("disturbance")
    for node in (Node("r", "input"), Node("d", "input"), Node("e", "sum", signs="+-"),
                 Node("C", "block", num="K"), Node("u", "sum", signs="++"),
                 Node("P", "block", num="1", den="s*(s+1)*(s+2)"), Node("b", "branch"), Node("y", "output")):
        d.add_node(node)
    for a, b, port in (("r", "e", 0), ("e", "C", 0), ("C", "u", 0), ("d", "u", 1), ("u", "P", 0),
                       ("P", "b", 0), ("b", "y", 0), ("b", "e", 1)):
        d.connect(a, b, port)
    d.set_parameter(Parameter("K", 2.0, 0.0, 10.0))
    d.set_tuning_parameter("K")
    d.set_analysis(input="r", output="y")
    dist = transfer_from_diagram(d, "d")
    assert not dist.reference
    r = step_response(dist, 4.0)
    assert r.metrics.final_value == pytest.approx(0.25)
    assert r.metrics.steady_state_error == pytest.approx(0.25)
    ref = step_response(transfer_from_diagram(d), 4.0)
    assert ref.metrics.steady_state_error == pytest.approx(0.0, abs=1e-15)


def test_unstable_loop_is_flagged_with_a_short_horizon():
    # s^3 + 3s^2 + 2s + K is unstable for K > 6 (Routh; from memory).
    tr = transfer_from_text("K", "s^3 + 3s^2 + 2s + K", parameter="K")
    r = step_response(tr, 8.0)
    assert not r.stable and "unstable: no steady state" in r.note
    assert r.metrics.final_value is None and r.metrics.overshoot is None
    growth = max(p.real for p in np.roots([1, 3, 2, 8]))
    assert r.t[-1] == pytest.approx(5 / growth)
    assert abs(r.y[-1]) > 10  # it has clearly grown


def test_hidden_unstable_mode_makes_the_loop_unstable():
    # C = (s-1)/(s+2) cancels the plant pole 1/(s-1): the visible response settles, the loop does not.
    d = Diagram()
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"), Node("C", "block", num="s-1", den="s+2"),
                 Node("P", "block", num="1", den="s-1"), Node("b", "branch"), Node("y", "output")):
        d.add_node(node)
    for a, b, port in (("r", "e", 0), ("e", "C", 0), ("C", "P", 0), ("P", "b", 0), ("b", "y", 0), ("b", "e", 1)):
        d.connect(a, b, port)
    d.set_analysis(input="r", output="y")
    r = step_response(transfer_from_diagram(d))
    assert not r.stable
    assert "hidden mode" in r.note
    assert r.y[-1] == pytest.approx(1 / 3, rel=1e-3)  # 1/(s+3) seen from outside (its G(0))


def test_improper_transfer_function_is_refused():
    with pytest.raises(AnalysisError) as err:
        step_response(transfer_from_text("s^3", "s^2 + 2s + 4"))
    assert err.value.code == "E407"


def test_metrics_of_a_first_order_lag():
    # 1 - e^{-t}: rise time ln 9 = 2.197, 2 % settling ln 50 = 3.912, no overshoot (from memory).
    t = np.linspace(0, 10, 4001)
    m = step_metrics(t, 1 - np.exp(-t), 1.0)
    assert m.rise_time == pytest.approx(math.log(9), abs=1e-4)
    assert m.settling_time == pytest.approx(math.log(50), abs=1e-4)
    assert m.overshoot == 0.0

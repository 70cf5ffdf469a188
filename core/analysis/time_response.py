"""Closed-loop step responses and their metrics, from a diagram or a typed numerator/denominator pair.

The transfer function is exact (:func:`core.graph.reduction.reduce_diagram`, or the typed polynomials),
kept parametric in the tuning parameter (:class:`ParametricTransfer`); at one value it is turned
into float coefficients and simulated exactly at the samples: a step input is constant, so the
state x and the input u = 1 together obey z' = M z, and z((k+1) dt) = E z(k dt) with
E = expm(M dt) -- a controllable canonical form and the matrix exponential (zero-order hold,
exact for a step input), with the state first balanced (a diagonal similarity; a loop's
coefficients may span 20 decades) and only scipy.linalg loaded. E is applied one step at a
time: higher powers of a non-normal E, taken to save steps, lose accuracy.

* Stability is decided exactly on the *full* characteristic polynomial (hidden modes included),
  so a loop whose visible response settles but which hides an unstable mode is still unstable.
* The steady-state value is exact, from the final value theorem: y(inf) = G(0) = num(0)/den(0),
  valid only when the loop is stable (None otherwise).
* Steady-state error: 1 - y(inf) for the reference (the analysis input); for any other input (a
  disturbance) the final value itself, since the ideal output deviation is 0.
* Horizon: 8 / |Re p| of the slowest visible pole (envelope e^-8), at most 1e4 / |p|max; an
  unstable loop is shown over a short horizon (5 / Re p of the fastest-growing pole, or six periods
  of a pole pair on the imaginary axis).

>>> tr = transfer_from_text("4", "s^2 + 2*s + 4")
>>> r = step_response(tr)
>>> round(r.metrics.overshoot, 2), r.metrics.final_value, r.stable
(16.3, 1.0, True)
"""
from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
from flint import fmpq

from core.algebra.expression import expression_parameters, parse_polynomial, to_mpoly
from core.algebra.polynomial import ParametricPolynomial, mpoly_context, scaled_floats, to_float, to_fmpq
from core.analysis.routh import is_hurwitz
from core.errors import AnalysisError

POINTS = 1000
MAX_POINTS = 8000
SETTLE_BAND = 0.02
RISE_LOW, RISE_HIGH = 0.1, 0.9
STABLE_HORIZON = 8.0      # time constants of the slowest pole
UNSTABLE_HORIZON = 5.0    # time constants of the fastest-growing pole
MARGINAL_PERIODS = 6.0
HORIZON_CAP = 1e4         # horizon at most this many units of 1/|p|max
UNSTABLE_NOTE = "unstable: no steady state"


@dataclass(frozen=True)
class ParametricTransfer:
    """An input-to-output transfer function num/den, exact, polynomial in the tuning parameter.

    ``characteristic`` is the loop's full characteristic polynomial (equal to ``den`` unless modes
    cancel); stability is judged on it. ``reference`` says whether the input is the reference (the
    analysis input) or a disturbance.
    """

    num: ParametricPolynomial
    den: ParametricPolynomial
    characteristic: ParametricPolynomial
    parameter: str | None = None
    input_id: str | None = None
    reference: bool = True

    def at(self, value=None) -> tuple[list[fmpq], list[fmpq], list[fmpq]]:
        """Exact (num, den, characteristic) coefficients at a parameter value, highest power first."""
        v = None if value is None else to_fmpq(value)
        return self.num.at(v), self.den.at(v), self.characteristic.at(v)

    def static_gain(self, value=None) -> fmpq | None:
        """G(0) = num(0)/den(0) exactly; None when den(0) = 0."""
        num, den, _ = self.at(value)
        if not den or den[-1] == 0:
            return None
        return (num[-1] if num else fmpq(0)) / den[-1]


@dataclass(frozen=True)
class StepMetrics:
    """Step-response figures; times in seconds, ``overshoot`` in percent of the final value.

    None where a figure does not exist: unstable loop (no final value), a final value of 0 (no
    overshoot or rise time relative to it), or a response that has not settled within the horizon.
    """

    overshoot: float | None
    rise_time: float | None
    settling_time: float | None
    peak_value: float
    peak_time: float
    final_value: float | None
    steady_state_error: float | None
    notes: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        """JSON-ready fields."""
        out = dict(self.__dict__)
        out["notes"] = list(self.notes)
        return out


@dataclass
class StepResponse:
    """A simulated unit-step response and its metrics (``note`` explains anything unusual)."""

    t: np.ndarray
    y: np.ndarray
    metrics: StepMetrics
    input_id: str | None
    stable: bool
    note: str = ""
    value: float | None = None
    poles: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=complex))


# -- building the transfer function -------------------------------------------------------------
def transfer_from_diagram(diagram, input_id: str | None = None, output_id: str | None = None,
                          values: Mapping[str, object] | None = None, reduction=None) -> ParametricTransfer:
    """The transfer function of a diagram from an input (default: the analysis input) to the output.

    Every parameter but the tuning one (``diagram.tuning_parameter``) is fixed at ``values`` or its nominal.
    ``reduction``, when given, is the diagram already reduced from that input to that output.
    Raises AnalysisError (E401 no input/output, E404 a parameter without value).
    """
    from core.graph.reduction import reduce_diagram  # reduction imports the model, which imports this package

    settings = diagram.analysis
    input_id = input_id or settings.input
    output_id = output_id or settings.output
    if input_id is None or output_id is None:
        raise AnalysisError("E401", "choose the analysis input and output to see a step response",
                            where="analysis")
    red = reduction if reduction is not None else reduce_diagram(diagram, input_id, output_id)
    fixed = {p.name: p.nominal for p in diagram.parameters.values()}
    fixed.update(values or {})
    parameter = diagram.tuning_parameter
    polys = []
    for poly in (red.closed_num_reduced, red.closed_den_reduced, red.closed_den):
        assert poly is not None  # a reduction to an output always carries its closed-loop parts
        try:
            polys.append(ParametricPolynomial.from_mpoly(poly, parameter, fixed))
        except KeyError as exc:
            name = exc.args[0]
            raise AnalysisError("E404", f"parameter {name} has no value; give one or tune it",
                                where=f"parameter {name}") from None
    num, den, characteristic = polys
    return ParametricTransfer(num, den, characteristic, parameter=parameter, input_id=input_id,
                              reference=input_id == settings.input)


def transfer_from_text(num: str, den: str, parameter: str | None = None,
                       at: Mapping[str, object] | None = None) -> ParametricTransfer:
    """A typed numerator/denominator pair (polynomials in s); ``den`` is the characteristic polynomial.

    >>> tr = transfer_from_text("K", "s^3 + 3s^2 + 2s + K", parameter="K")
    >>> [str(c) for c in tr.at(2)[1]]
    ['1', '3', '2', '2']
    """
    exprs = [parse_polynomial(num, where="numerator"), parse_polynomial(den, where="denominator")]
    ctx = mpoly_context(sorted(expression_parameters(num) | expression_parameters(den)))
    values = {k: to_fmpq(v) for k, v in (at or {}).items()}
    try:
        n, d = (ParametricPolynomial.from_mpoly(to_mpoly(e, ctx), parameter, values) for e in exprs)
    except KeyError as exc:
        raise AnalysisError("E404", f"parameter {exc.args[0]} has no value; give one or tune it",
                            where=f"parameter {exc.args[0]}") from None
    if d.degree < 0:
        raise AnalysisError("E403", "the denominator is identically zero", where="denominator")
    return ParametricTransfer(n, d, d, parameter=parameter)


# -- simulation ---------------------------------------------------------------------------------
def step_response(transfer: ParametricTransfer, value: float | None = None, horizon: float | None = None,
                  points: int = POINTS) -> StepResponse:
    """The unit-step response at a parameter value, simulated, with exact stability and final value.

    Poles too fast for floats (the denominator's leading coefficients vanish against the others
    once rounded: poles beyond about 1e300 rad/s) are simulated as instantaneous, with a note.
    Raises AnalysisError E407 when the transfer function is improper at this value (a step into
    it would need an impulse), E403 when its denominator vanishes, E409 when the floats left
    cannot describe it.
    """
    num_q, den_q, char_q = transfer.at(value)
    if not den_q or all(c == 0 for c in den_q):
        raise AnalysisError("E403", "the transfer function's denominator vanishes here", where="step response")
    if len(num_q) > len(den_q) and any(c != 0 for c in num_q):
        raise AnalysisError("E407", f"the transfer function is improper here (numerator degree {len(num_q) - 1}, "
                                    f"denominator degree {len(den_q) - 1}): a step input would need an impulse "
                                    "at t = 0", where="step response")
    stable = is_hurwitz(char_q, transfer.characteristic.degree)
    num, den = _float_pair(num_q, den_q)
    notes = []
    fast = int(np.argmax(den != 0)) if np.any(den) else den.size
    if fast:
        den, num = den[fast:], np.trim_zeros(num, "f") if np.any(num) else np.zeros(1)
        if den.size == 0 or num.size > den.size:
            raise AnalysisError("E409", "the transfer function's coefficients span more than the floating-point "
                                        "range here: the step response cannot be simulated", where="step response")
        notes.append(f"{fast} pole{'s' if fast > 1 else ''} beyond 1e300 rad/s simulated as instantaneous")
    poles = np.roots(den).astype(complex) if den.size > 1 else np.empty(0, dtype=complex)
    visible_stable = bool(np.all(poles.real < 0))
    t_end, capped = (horizon, False) if horizon is not None else response_horizon(poles)
    n = _point_count(t_end, poles, points)
    t = np.linspace(0.0, t_end, n)
    y = _simulate(num, den, t)
    final = None
    if stable:
        gain = transfer.static_gain(value)
        final = None if gain is None else to_float(gain)
    elif visible_stable:
        notes.append("a hidden mode is not stable: the output seems to settle but the loop does not")
    if capped and stable:
        notes.append("horizon capped: the slowest pole is far slower than the fastest")
    metrics = step_metrics(t, y, final, transfer.reference, notes)
    note = "; ".join(([UNSTABLE_NOTE] if not stable else []) + list(metrics.notes))
    return StepResponse(t, y, metrics, transfer.input_id, stable, note, value, poles)


def _float_pair(num_q: list, den_q: list) -> tuple[np.ndarray, np.ndarray]:
    """Float numerator and denominator, both times the one power of two that brings their largest
    coefficient near 1: the same transfer function, within the float range."""
    scaled = scaled_floats([*den_q, *num_q])
    den = np.array(scaled[: len(den_q)])
    num = np.array(scaled[len(den_q):]) if any(c != 0 for c in num_q) else np.zeros(1)
    return num, den


def _simulate(num: np.ndarray, den: np.ndarray, t: np.ndarray) -> np.ndarray:
    if not np.any(num):
        return np.zeros_like(t)
    if den.size == 1:  # a static gain
        return np.full_like(t, num[-1] / den[0])
    return step_samples(num, den, float(t[1] - t[0]) if t.size > 1 else 0.0, t.size)


def step_samples(num: np.ndarray, den: np.ndarray, dt: float, count: int) -> np.ndarray:
    """y(k dt), k = 0..count-1, of the unit-step response of num/den (proper, den of degree >= 1).

    >>> np.round(step_samples(np.array([1.0]), np.array([1.0, 1.0]), 1.0, 3), 6).tolist()
    [0.0, 0.632121, 0.864665]
    """
    from scipy.linalg import expm, matrix_balance  # scipy.linalg only: the program starts without it

    den = np.asarray(den, dtype=float)
    num = np.concatenate([np.zeros(den.size - len(num)), np.asarray(num, dtype=float)]) / den[0]
    den = den / den[0]
    n = den.size - 1
    # controllable canonical form (as scipy.signal.tf2ss), the constant input as one more state
    m = np.zeros((n + 1, n + 1))
    m[0, :n] = -den[1:]
    m[1:n, :n - 1] += np.eye(n - 1)
    m[0, n] = 1.0
    output = np.append(num[1:] - num[0] * den[1:], num[0])
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):  # entries of 1e-100 and less
        m, (scale, _) = matrix_balance(m, permute=False, separate=True)  # m -> diag(1/scale) m diag(scale)
    output = output * scale
    z = np.zeros((count, n + 1))
    z[0, n] = 1.0 / scale[n]
    with np.errstate(over="ignore", invalid="ignore"):
        one = expm(m * dt)
        rows, dot = list(z), np.dot  # row views, written in place
        for k in range(1, count):  # one step at a time: powers of a non-normal E lose accuracy
            dot(one, rows[k - 1], out=rows[k])
        return z @ output


def response_horizon(poles: np.ndarray) -> tuple[float, bool]:
    """(t_end, capped): how long to simulate for these poles (see the module notes).

    >>> response_horizon(np.array([-1.0, -0.5]))
    (16.0, False)
    """
    if poles.size == 0:
        return 1.0, False
    size = float(np.max(np.abs(poles)))
    scale = max(size, 1e-12)
    tiny = 1e-9 * scale
    growing = poles[poles.real > tiny]
    on_axis = poles[np.abs(poles.real) <= tiny]
    if growing.size or on_axis.size:
        candidates = [UNSTABLE_HORIZON / float(np.max(growing.real))] if growing.size else []
        candidates += [MARGINAL_PERIODS * 2 * math.pi / abs(p.imag) for p in on_axis if abs(p.imag) > tiny]
        decaying = poles[poles.real < -tiny]
        if not candidates:  # only poles at the origin: show the stable dynamics, else 10 s
            candidates = [STABLE_HORIZON / float(np.min(-decaying.real))] if decaying.size else [10.0]
        t_end = min(candidates)
    else:
        t_end = STABLE_HORIZON / float(np.min(-poles.real))
    cap = HORIZON_CAP / scale
    return (cap, True) if t_end > cap else (t_end, False)


def _point_count(t_end: float, poles: np.ndarray, points: int) -> int:
    """At least ``points``; more so the fastest oscillation gets ~20 samples a period (bounded)."""
    if poles.size == 0:
        return points
    fastest = float(np.max(np.abs(poles.imag))) / (2 * math.pi)
    wanted = int(t_end * fastest * 20)
    return int(min(max(points, wanted), MAX_POINTS))


# -- metrics ------------------------------------------------------------------------------------
def step_metrics(t: np.ndarray, y: np.ndarray, final: float | None, reference: bool = True,
                 notes: list[str] | None = None) -> StepMetrics:
    """Overshoot, 10-90 % rise time, 2 % settling time and peak of sampled step response samples.

    ``final`` is the exact steady-state value (None: the loop is unstable). With a final value of
    0 (a fully rejected disturbance) the settling band is 2 % of the peak deviation instead.

    >>> t = np.linspace(0, 10, 2001)
    >>> m = step_metrics(t, 1 - np.exp(-t), 1.0)
    >>> round(m.rise_time, 3), round(m.settling_time, 3), m.overshoot
    (2.197, 3.912, 0.0)
    """
    notes = list(notes or [])
    t, y = np.asarray(t, dtype=float), np.asarray(y, dtype=float)
    if final is None:
        i = int(np.nanargmax(np.abs(y))) if np.any(np.isfinite(y)) else 0
        return StepMetrics(None, None, None, float(y[i]), float(t[i]), None, None, tuple(notes))
    error = (1.0 - final) if reference else final
    if final == 0.0:
        i = int(np.argmax(np.abs(y)))
        peak_t, peak_y = _refine_peak(t, np.abs(y), i)
        peak_y = math.copysign(peak_y, y[i])
        band = SETTLE_BAND * abs(peak_y)
        notes.append("final value 0: no overshoot or rise time; settling band 2 % of the peak deviation")
        settle = _settling_time(t, y, 0.0, band, notes) if band > 0 else 0.0
        return StepMetrics(None, None, settle, peak_y, peak_t, 0.0, error, tuple(notes))
    sign = 1.0 if final > 0 else -1.0
    z = y * sign / abs(final)  # normalised: rises to 1
    i = int(np.argmax(z))
    peak_t, peak_z = _refine_peak(t, z, i)
    overshoot = max(0.0, (peak_z - 1.0) * 100.0)
    t_low, t_high = _first_crossing(t, z, RISE_LOW), _first_crossing(t, z, RISE_HIGH)
    rise = t_high - t_low if t_low is not None and t_high is not None else None
    settle = _settling_time(t, y, final, SETTLE_BAND * abs(final), notes)
    return StepMetrics(overshoot, rise, settle, peak_z * abs(final) * sign, peak_t, final, error, tuple(notes))


def _refine_peak(t: np.ndarray, z: np.ndarray, i: int) -> tuple[float, float]:
    """Vertex of the parabola through the largest sample and its neighbours (uniform steps)."""
    if 0 < i < len(z) - 1:
        a, b, c = z[i - 1], z[i], z[i + 1]
        curve = a - 2 * b + c
        if curve < 0:
            shift = 0.5 * (a - c) / curve
            h = t[i + 1] - t[i]
            return float(t[i] + shift * h), float(b - 0.25 * (a - c) * shift)
    return float(t[i]), float(z[i])


def _first_crossing(t: np.ndarray, z: np.ndarray, level: float) -> float | None:
    """First time z reaches ``level`` (linear interpolation); 0 when it starts at or above it."""
    above = np.flatnonzero(z >= level)
    if above.size == 0:
        return None
    k = int(above[0])
    if k == 0:
        return 0.0
    return float(t[k - 1] + (level - z[k - 1]) / (z[k] - z[k - 1]) * (t[k] - t[k - 1]))


def _settling_time(t: np.ndarray, y: np.ndarray, final: float, band: float, notes: list[str]) -> float | None:
    """When y enters the band around ``final`` for good (interpolated); None if not by the end."""
    outside = np.flatnonzero(np.abs(y - final) > band)
    if outside.size == 0:
        return 0.0
    k = int(outside[-1])
    if k == len(y) - 1:
        notes.append("not settled within the horizon")
        return None
    d0, d1 = abs(y[k] - final) - band, abs(y[k + 1] - final) - band
    return float(t[k] + d0 / (d0 - d1) * (t[k + 1] - t[k]))

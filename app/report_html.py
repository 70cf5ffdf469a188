"""The report an engineer hands on, as one HTML page built from one AnalysisResult.

Every number is written by the same functions the panels use (``number``, ``pole_number``,
``evaluate_entry``, ``how_lost``, the range panel's interval text), from the same Report, so the
page and the panels agree. The HTML keeps to what both a browser and Qt's rich-text engine (used
for the PDF) draw: tables with attributes, a few class selectors, ``<sup>``. Sections carry ids
(``meta``, ``caution``, ``diagram``, ``blocks``, ``parameters``, ``polynomial``, ``routh``,
``range``, ``poles``, ``warnings`` and one per extra section) so they can be found again.

The step response and requirements sections appear when the AnalysisResult carries the
time-domain part (``result.time_domain``) and a reference step or a requirement exists.

Pictures are named by key (``diagram``, ``plot-<panel>``); the caller maps each key to an image
source (a data URI for the HTML file, a resource name for the PDF) and its width in CSS pixels.
"""
from __future__ import annotations

import html
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from itertools import pairwise

from app.panels.common import MINUS, math_html, number, pole_number, pole_size
from app.panels.polynomial_panel import factored
from app.panels.range_panel import how_lost, range_intervals_html, robust_html
from app.panels.routh_panel import entry_display, evaluate_entry, power_label
from app.theme import MEANING_COLOURS, meaning_colour
from core.algebra.polynomial import to_fmpq
from core.analysis.report import CAUTION
from core.errors import notice_kind
from core.model.diagram import DECAY_WORDS, Diagram
from core.present.report_text import distance_phrase

ROLE_NAMES = {"gain": "Gain", "controller": "Controller", "actuator": "Actuator", "plant": "Plant",
              "sensor": "Sensor", "other": "Other"}


def report_style() -> str:
    """The report's CSS, in the light scheme's colours (app.theme.MEANING_COLOURS): a report is
    read on paper or a white page whatever the window's scheme."""
    c = {name: meaning_colour(name, dark=False).name() for name in MEANING_COLOURS}
    return f"""
body {{ font-family: 'DejaVu Sans', sans-serif; font-size: 9.5pt; color: {c['marker']}; }}
h1 {{ font-size: 17pt; margin: 0 0 4px 0; }}
h2 {{ font-size: 12.5pt; margin: 16px 0 5px 0; color: {c['heading']}; border-bottom: 1px solid {c['rule']}; }}
h3 {{ font-size: 10pt; margin: 8px 0 3px 0; }}
p {{ margin: 3px 0; }}
table.grid {{ border-collapse: collapse; margin: 4px 0; }}
table.grid th {{ background-color: {c['header']}; font-weight: bold; text-align: left; }}
table.grid td, table.grid th {{ border: 1px solid {c['rule']}; padding: 3px 7px; }}
td.first {{ background-color: {c['tint']}; }}
td.special {{ background-color: {c['special']}; }}
.num {{ font-family: 'DejaVu Sans Mono', monospace; }}
.math {{ font-family: 'DejaVu Serif', serif; }}
.muted {{ color: {c['muted']}; }}
.bad {{ color: {c['unstable']}; font-weight: bold; }}
.good {{ color: {c['good']}; font-weight: bold; }}
.warn {{ color: {c['warning']}; }}
table.caution {{ border-collapse: collapse; margin: 8px 0 6px 0; }}
table.caution td {{ background-color: {c['caution']}; border: 2px solid {c['caution_rule']}; padding: 7px 10px; }}
"""


STEP_PICTURE = "plot-step-response"
OWN_SECTIONS = ("Pole map", "Step response", "Requirements")  # panels whose sections are built here


@dataclass
class ReportSection:
    """An extra section (e.g. a step response): its id, title, HTML body and optional picture key."""

    id: str
    title: str
    body: str
    picture: str | None = None


@dataclass
class ReportInputs:
    """What a report is made of: the diagram, its analysis and where it came from."""

    diagram: Diagram
    result: object  # app.controller.AnalysisResult
    file_name: str
    date: str
    version: str
    pictures: Mapping[str, tuple[str, int]] = field(default_factory=dict)  # key -> (src, width px)
    sections: list[ReportSection] = field(default_factory=list)

    @property
    def nominal_value(self) -> float | None:
        """The tuning parameter's nominal value as analysed (None without one)."""
        tuning = self.result.tuning_range
        return tuning.nominal if tuning is not None else None


def esc(text: str) -> str:
    """HTML-escaped text."""
    return html.escape(str(text), quote=True)


def _grid(cls: str, head: list[str], rows: list[list[str]], raw: bool = True) -> str:
    """A bordered table; cells are HTML unless ``raw`` is False."""
    fix = (lambda c: c) if raw else esc
    out = [f"<table class='grid' id='{cls}' border='1' cellspacing='0' cellpadding='4'>"]
    out.append("<tr>" + "".join(f"<th>{fix(h)}</th>" for h in head) + "</tr>")
    for row in rows:
        out.append("<tr>" + "".join(c if c.startswith("<td") else f"<td>{fix(c)}</td>" for c in row) + "</tr>")
    out.append("</table>")
    return "".join(out)


def _picture(inputs: ReportInputs, key: str, alt: str) -> str:
    if key not in inputs.pictures:
        return ""
    src, width = inputs.pictures[key]
    return f"<p class='picture'><img src='{esc(src)}' width='{width}' alt='{esc(alt)}'></p>"


def _num(text: str) -> str:
    return f"<span class='num'>{text}</span>"


# -- sections ------------------------------------------------------------------------------------
def header_html(inputs: ReportInputs) -> str:
    """Title, the facts of where the report came from, and the caution."""
    d = inputs.diagram
    report = inputs.result.report
    rows = [["File", esc(inputs.file_name)], ["Date", esc(inputs.date)],
            ["Program", f"Loopwright {esc(inputs.version)}"]]
    if report is not None and report.parameter:
        rows.append(["Tuning parameter", f"{esc(report.parameter)} = {_num(number(inputs.nominal_value))} (nominal)"])
    meta = "".join(f"<tr><td class='muted'>{k}</td><td>{v}</td></tr>" for k, v in rows)
    return (f"<h1>{esc(d.name)}</h1>"
            f"<p class='muted'>Stability report of a feedback loop drawn as a block diagram</p>"
            f"<table id='meta' cellspacing='0' cellpadding='2'>{meta}</table>"
            "<table class='caution' id='caution' width='100%' border='2' cellspacing='0' cellpadding='8'>"
            f"<tr><td><b>Caution.</b> {esc(CAUTION)}</td></tr></table>")


def verdict_html(inputs: ReportInputs) -> str:
    """One line: stable or not at the nominal values, and whether the decay requirement is met."""
    result = inputs.result
    report = result.report
    if report is None:
        return f"<p id='verdict' class='bad'>No analysis: {esc(result.message or 'nothing to analyse')}</p>"
    nominal = report.nominal
    at = (f"At {esc(report.parameter)} = {_num(number(inputs.nominal_value))}: " if report.parameter
          and inputs.nominal_value is not None else "At the nominal values: ")
    if nominal is None:
        return f"<p id='verdict'>{at}no nominal value: the verdict is given as a range only.</p>"
    if nominal.stable:
        words = "<span class='good'>STABLE</span>, every pole in the left half plane"
    else:
        why = [f"{nominal.rhp} in the right half plane"] if nominal.rhp else []
        why += [f"{nominal.jw} on the imaginary axis"] if nominal.jw else []
        words = "<span class='bad'>UNSTABLE</span>" + (f" ({', '.join(why)})" if why else "")
    if report.decay is not None and report.decay.nominal_ok is not None:
        words += ("; decay requirement <span class='good'>met</span>" if report.decay.nominal_ok
                  else "; decay requirement <span class='bad'>not met</span>")
    return f"<p id='verdict' style='font-size:11pt'>{at}{words}</p>"


def diagram_html(inputs: ReportInputs) -> str:
    """The picture, the blocks, the parameters and the analysis settings."""
    d = inputs.diagram
    blocks = [[esc(n.id), esc(n.label), ROLE_NAMES.get(n.role, esc(n.role)),
               f"<span class='math'>{math_html(n.num)}</span>", f"<span class='math'>{math_html(n.den)}</span>"]
              for n in d.nodes.values() if n.kind == "block"]
    params = [[esc(p.name), _num(number(p.nominal)), _num(number(p.minimum)), _num(number(p.maximum)),
               "yes" if d.tuning_parameter == p.name else ""] for p in d.parameters.values()]
    out = ["<h2 id='diagram'>Block diagram</h2>", _picture(inputs, "diagram", "block diagram")]
    out.append("<h3>Blocks</h3>" + (_grid("blocks", ["Id", "Label", "Role", "Numerator", "Denominator"], blocks)
                                    if blocks else "<p class='muted'>no blocks</p>"))
    out.append("<h3>Parameters</h3>" + (_grid("parameters", ["Name", "Nominal", "Min", "Max", "Tuning"], params)
                                        if params else "<p class='muted'>no parameters</p>"))
    a = d.analysis
    settings = [f"input {esc(a.input or '—')}, output {esc(a.output or '—')}"]
    if a.decay_value:
        settings.append(f"decay requirement: {DECAY_WORDS[a.decay_mode].name if a.decay_mode in DECAY_WORDS else esc(a.decay_mode)} "
                        f"{_num(number(a.decay_value))}" + (" 1/s" if a.decay_mode == "sigma" else " s"))
    out.append(f"<p id='settings'>Analysed from {'; '.join(settings)}.</p>")
    return "".join(out)


def polynomial_html(inputs: ReportInputs) -> str:
    """Characteristic polynomial (expanded, at nominal, factored), transfer function, hidden modes."""
    report = inputs.result.report
    rows = [["Expanded", f"<span class='math' id='char-poly'>{math_html(report.polynomial)}</span>"]]
    analysed = report.analysed.text()
    if analysed != report.polynomial:
        rows.append(["Other parameters at nominal", f"<span class='math'>{math_html(analysed)}</span>"])
    fac = factored(report.analysed)
    rows.append(["Factored (rational coefficients)", f"<span class='math'>{math_html(fac)}</span>" if fac
                 else "<span class='muted'>does not factor over the rationals</span>"])
    transfer = report.transfer_function
    if transfer:
        rows.append(["Closed-loop transfer function, input to output",
                     f"<span class='math' id='transfer'>({math_html(transfer['num'])}) / ({math_html(transfer['den'])})</span>"])
        if (transfer["num"], transfer["den"]) != (transfer["num_full"], transfer["den_full"]):
            rows.append(["Before cancelling common factors",
                         f"<span class='math'>({math_html(transfer['num_full'])}) / ({math_html(transfer['den_full'])})</span>"])
    body = "".join(f"<tr><td class='muted' width='30%'>{k}</td><td>{v}</td></tr>" for k, v in rows)
    out = ["<h2 id='polynomial'>Characteristic polynomial</h2>",
           f"<table id='polynomial-forms' cellspacing='0' cellpadding='3' width='100%'>{body}</table>"]
    if report.hidden_modes:
        lines = []
        for mode in report.hidden_modes:
            blocks = ", ".join(mode.blocks) if mode.blocks else "the loop"
            state = "<span class='bad'>does not decay</span>" if mode.unstable else "<span class='good'>decays</span>"
            mult = f" (×{mode.pole.multiplicity})" if mode.pole.multiplicity > 1 else ""
            lines.append(f"<li class='warn'>s = {_num(pole_number(mode.pole))}{mult} "
                         f"sits in {esc(blocks)}: it cancels out of the input-to-output transfer function but "
                         f"stays in the loop; it {state}.</li>")
        out.append(f"<h3>Hidden modes</h3><ul id='hidden-modes'>{''.join(lines)}</ul>")
    return "".join(out)


def _entry_html(text: str, uses_eps: bool) -> str:
    """A symbolic entry as the panel writes it, with real superscripts."""
    return re.sub(r"\^(\d+)", r"<sup>\1</sup>", esc(entry_display(text, uses_eps)))


def _signs_text(sign: int | None) -> str:
    return {1: "+", -1: MINUS, 0: "0", None: "?"}[sign]


def routh_html(inputs: ReportInputs) -> str:
    """The Routh array: entries symbolic in the tuning parameter; their values at nominal and the
    first-column signs in a second table (one table when there is no tuning parameter)."""
    arr = inputs.result.report.routh
    width = max((len(r) for r in arr.rows), default=1)
    value = inputs.nominal_value if arr.parameter else None
    exact = to_fmpq(value) if value is not None else None
    values = [[evaluate_entry(e, arr, exact) for e in row] for row in arr.rows]
    special = {s.row for s in arr.special}

    def label(i: int) -> str:
        return f"<td><b>{power_label(arr.powers[i])}</b>{' *' if i in special else ''}</td>"

    def cell(i: int, j: int, content: str) -> str:
        cls = "num first" if j == 0 else ("num special" if i in special else "num")
        return f"<td align='center' class='{cls}'>{content}</td>"

    sign_cell = "<td align='center' class='num'>{}</td>"
    symbolic = []
    for i, row in enumerate(arr.rows_text()):
        cells = [label(i)] + [cell(i, j, _entry_html(row[j], arr.uses_eps) if j < len(row) else "")
                              for j in range(width)]
        if not arr.parameter:
            cells.append(sign_cell.format(_signs_text(values[i][0].sign)))
        symbolic.append(cells)
    columns = [f"column {j + 1}" for j in range(width)]
    out = ["<h2 id='routh'>Routh array</h2>"]
    if arr.parameter:
        name = esc(arr.parameter)
        out.append(f"<p>Entries as functions of {name}; first column tinted; rows marked * are special cases.</p>")
        out.append(_grid("routh-array", ["Row", *columns], symbolic))
        rows = [[label(i)] + [cell(i, j, esc(values[i][j].text) if j < len(values[i]) else "") for j in range(width)]
                + [sign_cell.format(_signs_text(values[i][0].sign))] for i in range(len(values))]
        out.append(f"<h3>Values at the nominal {name} = {_num(number(value))}</h3>")
        out.append(_grid("routh-values", ["Row", *columns, "Sign"], rows))
    else:
        out.append("<p>First column tinted; rows marked * are special cases.</p>")
        out.append(_grid("routh-array", ["Row", *columns, "Sign"], symbolic))
    signs = [v[0].sign for v in values]
    changes = sum(1 for a, b in pairwise(signs) if a is not None and b is not None and a * b < 0)
    out.append(f"<p id='sign-changes'>Sign changes down the first column: {_num(str(changes))}.</p>")
    if arr.special:
        notes = "".join(f"<li><b>{power_label(arr.powers[s.row])}</b>: {esc(s.note)}</li>" for s in arr.special)
        out.append(f"<ul id='routh-notes'>{notes}</ul>")
    return "".join(out)


def range_html(inputs: ReportInputs) -> str:
    """Stable intervals, their endpoints (exact and decimal, how stability is lost), margins, decay."""
    report = inputs.result.report
    out = ["<h2 id='range'>Stable range</h2>"]
    if report.stable_range is None:
        out.append("<p>No tuning parameter is chosen: the verdict holds for the nominal values only.</p>")
        return "".join(out) + _decay_html(report)
    name = esc(report.parameter)
    rng = report.stable_range.to_dict()
    if rng["intervals"]:
        ivs = range_intervals_html(rng)
        out.append(f"<p id='intervals'><b>Stable for {name} in</b> {_num(ivs)}</p>")
    else:
        out.append(f"<p id='intervals' class='bad'>Stable for no value of {name}.</p>")
    if rng["endpoints"]:
        rows = [[_num(f"{name} = {esc(e['exact']).replace('-', MINUS)}"), _num(number(e["value"], 10) if math.isfinite(e["value"]) else e["approx"]),
                 esc(how_lost(e["kind"], e["omega"]))] for e in rng["endpoints"]]
        out.append("<h3>How stability is lost</h3>" + _grid("endpoints", ["Endpoint (exact)", "Decimal",
                                                                          "What happens there"], rows))
    robust = robust_html(report)
    if robust:
        out.append("<h3 id='robust'>Robust range</h3>" + robust)
    out.append(_margins_html(report))
    out.append(_decay_html(report))
    return "".join(out)


def _margins_html(report) -> str:
    if report.margins is None:
        return ""
    md, name = report.margins.to_dict(), esc(report.parameter)
    if not md["stable"]:
        return (f"<h3>Margins</h3><p id='margins'>At the nominal {name} = {_num(number(md['nominal']))} the loop "
                "is not stable: no margins.</p>")
    rows = []
    for side, factor, db, edge in (("may rise", "rise_factor", "rise_db", "high"),
                                         ("may fall", "fall_factor", "fall_db", "low")):
        if md[edge] is None:
            rows.append([f"{name} {side}", "without limit", "", ""])
            continue
        rows.append([f"{name} {side}", _num(f"×{number(md[factor], 4)}") if md[factor] is not None else "",
                     _num(f"{number(md[db], 3)} dB") if md[db] is not None else "",
                     _num(distance_phrase(md, side.split()[1]).replace("-", MINUS))])
    return (f"<h3>Margins at the nominal {name} = {_num(number(md['nominal']))}</h3>"
            + _grid("margins", ["", "Factor", "Factor in dB", "Distance"], rows))


def _decay_html(report) -> str:
    dec = report.decay
    if dec is None:
        return ""
    d = dec.to_dict()
    out = [(f"<h3>Decay requirement</h3><p id='decay'>σ = {_num(number(d['sigma']))} 1/s "
            f"<span class='muted'>({esc(d['note'])})</span></p>")]
    if d["intervals"] is not None:
        if d["intervals"]:
            ivs = range_intervals_html(d)
            out.append(f"<p id='decay-range'>Met for {esc(report.parameter)} in {_num(ivs)}</p>")
        else:
            out.append(f"<p id='decay-range' class='bad'>Met for no value of {esc(report.parameter)}.</p>")
    return "".join(out)


def poles_html(inputs: ReportInputs) -> str:
    """The poles at nominal (damping ratio, natural frequency) and the pole map picture."""
    report = inputs.result.report
    out = ["<h2 id='poles'>Poles at the nominal values</h2>"]
    if report.nominal is not None and report.nominal.poles:
        rows = [[_num(pole_number(p)), _num(str(p.multiplicity)),
                 _num(number(p.damping, 4)) if p.damping is not None else "—", _num(pole_size(p))]
                for p in report.nominal.poles]
        out.append(_grid("pole-table", ["Pole s", "Multiplicity", "Damping ratio", "Natural frequency (rad/s)"],
                         rows))
    out.append(_picture(inputs, "plot-pole-map", "pole map"))
    if "plot-pole-map" in inputs.pictures:
        decay = ", the decay line dashed" if report.decay is not None else ""
        out.append("<p class='muted'>Pole map: × poles at the nominal value, ○ zeros, grey lines the pole paths "
                   f"over the tuning parameter's range; the right half plane is shaded red{decay}.</p>")
    return "".join(out)


def _reference_step(inputs: ReportInputs):
    """The unit-step response from the reference input at the nominal value (the one the analysis
    already simulated), or None."""
    from core.errors import LoopwrightError
    result = inputs.result
    td = getattr(result, "time_domain", None)
    if td is None or not td.reference or td.reference not in td.transfers:
        return None
    try:
        return result.step_at(td.reference, inputs.nominal_value if result.report.parameter else None)
    except (LoopwrightError, KeyError):
        return None


def step_html(inputs: ReportInputs, step) -> str:
    """The step response from the reference at the nominal value: picture and figures (as the
    Step response panel writes them)."""
    if step is None:
        return ""
    from app.panels.step_panel import READOUTS, readout_texts
    texts = readout_texts(step)
    td = inputs.result.time_domain
    rows = [[title, _num(esc(texts[key]))] for key, title in READOUTS]
    return ("<h2 id='step'>Step response</h2>"
            f"<p>Unit step at the reference input {esc(td.reference)}, at the nominal values.</p>"
            + _picture(inputs, STEP_PICTURE, "step response") + _grid("step-figures", ["Figure", "Value"], rows)
            + (f"<p class='muted'>{esc(step.note)}</p>" if getattr(step, "note", "") else ""))


def requirements_html(inputs: ReportInputs, step) -> str:
    """Each requirement's verdict at the nominal value and the range of the tuning parameter
    meeting them all (empty when no requirement is set)."""
    td = getattr(inputs.result, "time_domain", None)
    if td is None:
        return ""
    from app.panels.requirements_panel import figure
    from core.analysis.requirements import evaluate
    report = inputs.result.report
    value = inputs.nominal_value if report.parameter else None
    verdicts = evaluate(td.requirements, report, step, value)
    if not verdicts and td.joint is None:
        return ""
    words = {True: "<span class='good'>PASS</span>", False: "<span class='bad'>FAIL</span>", None: "—"}
    rows = [[esc(v.label or v.name), _num(esc(figure(v.required, v.unit))), _num(esc(figure(v.actual, v.unit))),
             words[v.passed], "exact" if v.exact else "numeric"] for v in verdicts]
    out = ["<h2 id='requirements'>Requirements</h2>"]
    if rows:
        at = f" at the nominal {esc(report.parameter)} = {_num(number(value))}" if value is not None else ""
        out.append(f"<p>Verdicts{at}.</p>")
        out.append(_grid("requirement-verdicts", ["Requirement", "Required", "Actual", "Verdict", "Decision"], rows))
    joint = td.joint
    if joint is not None:
        text = (_num(esc(joint.text()).replace("-", MINUS)) if joint.intervals
                else f"<span class='bad'>no value of {esc(joint.parameter)}</span>")
        kind = "exact" if joint.exact else "numeric"
        out.append(f"<p id='joint-range'><b>Stable and meeting all:</b> {esc(joint.parameter)} in {text} ({kind})</p>")
        out += [f"<p class='muted'>{esc(n)}</p>" for n in joint.notes]
    return "".join(out)


def warnings_html(inputs: ReportInputs) -> str:
    """Warnings of the analysis (hidden modes have their own list) and notes at the nominal value."""
    report = inputs.result.report
    items = [w for w in report.warnings if notice_kind(w) != "hidden_mode"]  # those have their section
    if report.nominal is not None:
        items += report.nominal.notes
    body = ("".join(f"<li class='warn'>{math_html(w)}</li>" for w in items) if items
            else "<li class='muted'>none</li>")
    return f"<h2 id='warnings'>Warnings and notes</h2><ul id='warning-list'>{body}</ul>"


def extra_html(inputs: ReportInputs) -> str:
    """The extra sections, each with its picture when one was given."""
    return "".join(f"<h2 id='{esc(s.id)}'>{esc(s.title)}</h2>"
                   + (_picture(inputs, s.picture, s.title) if s.picture else "") + s.body for s in inputs.sections)


def report_html(inputs: ReportInputs) -> str:
    """The whole report as one HTML page."""
    parts = [header_html(inputs), verdict_html(inputs), diagram_html(inputs)]
    if inputs.result.report is not None:
        step = _reference_step(inputs)
        parts += [polynomial_html(inputs), routh_html(inputs), range_html(inputs), poles_html(inputs),
                  step_html(inputs, step), requirements_html(inputs, step), extra_html(inputs),
                  warnings_html(inputs)]
    return ("<!DOCTYPE html><html><head><meta charset='utf-8'>"
            f"<title>{esc(inputs.diagram.name)} — stability report</title><style>{report_style()}</style></head>"
            f"<body>{''.join(parts)}</body></html>")

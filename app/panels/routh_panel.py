"""Routh array panel: entries symbolic in the tuning parameter beside their values at the current
value, the first column tinted, sign changes marked, special rows annotated, copy as plain text.

Values are exact: each entry is a rational function (core.analysis.routh.RationalFunction) evaluated at the
current value as a rational number; in rows built with the ε method the entry stays a function of
ε and its sign is read as ε → 0+. While the slider moves, entries come from float tables with an
error bound (:mod:`app.panels.routh_values`), shown only where the bound proves the displayed text
and sign equal the exact ones; the exact values follow once the value rests for :data:`REST_MS`.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

from flint import fmpq, fmpq_poly
from PySide6.QtCore import QRect, Qt, QTimer
from PySide6.QtGui import QAction, QBrush, QGuiApplication, QPen
from PySide6.QtWidgets import (
    QAbstractItemView,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QStyledItemDelegate,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from app.panels.common import MINUS, MessageLabel, Readout, colour, is_palette_change, number, number_css
from app.panels.routh_values import FloatEntries
from app.theme import figure_font
from core.algebra.polynomial import decimal_text, to_fmpq
from core.analysis.routh import RationalFunction, RouthArray
from core.present.report_text import routh_table

ENTRY_CHARS = 24  # symbolic entries wider than this wrap within their cell (full text in the tooltip)
CELL_CHARS = 6 * ENTRY_CHARS  # a longer entry is cut at a term with "…" (its tooltip holds more)
TIP_CHARS = 2000  # tooltips stop here; Copy as text gives every entry whole
SUPERSCRIPTS = str.maketrans("0123456789", "⁰¹²³⁴⁵⁶⁷⁸⁹")
EPS = "ε"
REST_MS = 150  # the slider resting this long: entries evaluated exactly (tooltips with exact rationals)
LIVE_TIP = "the exact value shows once the slider rests"


def power_label(power: int) -> str:
    """``s³`` style row label."""
    return "s" + str(power).translate(SUPERSCRIPTS)


def entry_display(text: str, uses_eps: bool) -> str:
    """Entry text for the table: ε for eps, a true minus sign, no explicit product stars."""
    if uses_eps:
        text = re.sub(r"\beps_?\b", EPS, text)
    text = re.sub(r"(?<![\d/.])(\d+)\*(?=[A-Za-z(ε])", r"\1", text).replace("*", "·")
    return re.sub(r"(^|[\s(/])-", lambda m: m.group(1) + MINUS, text)


@lru_cache(maxsize=1024)  # most entries keep their text from one result to the next
def cell_text(text: str, uses_eps: bool) -> str:
    """Entry text for a table cell: :func:`entry_display` with powers as superscript digits.

    >>> cell_text("-3*K^2 + 1/2*K", False)
    '−3K² + 1/2·K'
    """
    return re.sub(r"\^(\d+)", lambda m: m.group(1).translate(SUPERSCRIPTS), entry_display(text, uses_eps))


def cell_texts(text: str, uses_eps: bool) -> tuple[str, str]:
    """(shown, tooltip) for one entry: the shown text cut after a whole term at :data:`CELL_CHARS`
    characters, the tooltip (empty for a short entry) at :data:`TIP_CHARS`, so a huge entry never
    costs the window time.

    >>> cell_texts("K + 1", False)
    ('K + 1', '')
    >>> shown, tip = cell_texts(" + ".join(f"{i}*K^{i}" for i in range(1, 60)), False)
    >>> shown.endswith(" …"), len(shown) <= CELL_CHARS + 2, tip.startswith("1K¹ + 2K²")
    (True, True, True)
    """
    shown = cell_text(_cut(text, CELL_CHARS), uses_eps)
    tip = cell_text(_cut(text, TIP_CHARS), uses_eps) if len(shown) > ENTRY_CHARS else ""
    return shown, tip


CELLS_KEY = "routh_cells"


def routh_cells(arr: RouthArray) -> list[list[tuple[str, str]]]:
    """:func:`cell_texts` of every entry of ``arr``, row by row."""
    return [[cell_texts(text, arr.uses_eps) for text in row] for row in arr.rows_text()]


VALUES_KEY = "routh_values"


def exact_values(arr: RouthArray, value: float | None) -> list[list[EntryValue]]:
    """Every entry of ``arr`` at the tuning value ``value``, exactly (:func:`evaluate_entry`)."""
    exact = to_fmpq(value) if value is not None else None
    return [[evaluate_entry(e, arr, exact) for e in row] for row in arr.rows]


def ready_cells(result) -> None:
    """Make the array's cell texts, and its values at the nominal value, on the worker thread
    (exact and text work, no widget touched): writing them into the table is then all the GUI
    thread does when the result arrives."""
    if result.report is None:
        return
    arr = result.report.routh
    result.display[CELLS_KEY] = routh_cells(arr)
    if arr.parameter is not None and result.tuning_range is not None:
        nominal = result.tuning_range.nominal
        result.display[VALUES_KEY] = (nominal, exact_values(arr, nominal))


def _cut(text: str, limit: int) -> str:
    if len(text) <= limit:
        return text
    space = text.rfind(" ", 0, limit)
    return text[:space if space > 0 else limit] + " …"


def _powers(text: str) -> str:
    """``s^2`` written as ``s²``."""
    return re.sub(r"s\^(\d+)", lambda m: power_label(int(m.group(1))), text)


@dataclass(frozen=True)
class EntryValue:
    """One entry at the current value: display text, exact text, and its sign (None if undefined)."""

    text: str
    exact: str
    sign: int | None


def _sign(q: fmpq) -> int:
    return (q > 0) - (q < 0)


def _in_eps(entry: RationalFunction, value: fmpq) -> RationalFunction:
    """An entry over Q(k, ε) with k = value: a rational function of ε alone (fmpq_poly)."""
    def reduce(p) -> fmpq_poly:
        k_name = p.context().names()[0]
        terms = p.subs({k_name: value}).to_dict()
        top = max((e[1] for e in terms), default=0)
        return fmpq_poly([terms.get((0, i), 0) for i in range(top + 1)])
    den = reduce(entry.den)
    if den.is_zero():
        raise ZeroDivisionError
    return RationalFunction(reduce(entry.num), den)


def sign_summary(signs: list[int | None], powers: list[int]) -> str:
    """One line on the first column's signs: how many changes and between which rows.

    >>> sign_summary([1, 1, -1, 1], [3, 2, 1, 0])
    'First column: 2 sign changes (s² → s¹, s¹ → s⁰)'
    >>> sign_summary([1, 1, 1], [2, 1, 0]), sign_summary([1, None], [1, 0])
    ('First column: no sign change', 'First column: a sign not decided here (?)')
    """
    if any(s is None or s == 0 for s in signs):
        return "First column: a sign not decided here (?)" if None in signs else "First column: a zero entry"
    pairs = [f"{power_label(powers[i])} → {power_label(powers[i + 1])}" for i in range(len(signs) - 1)
             if signs[i] * signs[i + 1] < 0]
    if not pairs:
        return "First column: no sign change"
    return f"First column: {len(pairs)} sign change{'s' if len(pairs) > 1 else ''} ({', '.join(pairs)})"


def evaluate_entry(entry: RationalFunction, array: RouthArray, value) -> EntryValue:
    """The entry at tuning value ``value`` (exact); functions of ε are kept and signed as ε → 0+.

    >>> from core.analysis.routh import routh_array
    >>> from core.algebra.polynomial import ParametricPolynomial
    >>> arr = routh_array(ParametricPolynomial.from_coefficients([1, 3, 2, fmpq_poly([0, 1])], "K"))
    >>> evaluate_entry(arr.rows[2][0], arr, 3)
    EntryValue(text='1', exact='1', sign=1)
    """
    v = value if isinstance(value, fmpq) else to_fmpq(value) if value is not None else fmpq(0)
    try:
        if not array.uses_eps:
            q = entry(v) if not entry.is_constant() else entry.constant()
            return EntryValue(decimal_text(q).replace("-", MINUS), str(q), _sign(q))
        rf = entry if isinstance(entry.num, fmpq_poly) else _in_eps(entry, v)
    except ZeroDivisionError:
        return EntryValue("undefined", "the entry's denominator vanishes at this value", None)
    if rf.is_constant():
        q = rf.constant()
        return EntryValue(decimal_text(q).replace("-", MINUS), str(q), _sign(q))
    text = entry_display(rf.text(EPS), True)
    return EntryValue(text, f"{text}, sign as ε → 0+", rf.sign_near_zero())


def _same_entries(a: list[list[RationalFunction]] | None, b: list[list[RationalFunction]]) -> bool:
    """Whether two arrays' rows hold equal entries (comparing is far cheaper than writing texts)."""
    return a is not None and len(a) == len(b) and all(
        len(ra) == len(rb) and all(type(x.num) is type(y.num) and x.num == y.num and x.den == y.den
                                   for x, y in zip(ra, rb))
        for ra, rb in zip(a, b))


def _set_text(item: QTableWidgetItem, text: str, tip: str) -> None:
    """Change a cell's text and tooltip only where they differ (each change repaints the cell)."""
    if item.text() != text:
        item.setText(text)
    if item.toolTip() != tip:
        item.setToolTip(tip)


def _set_caption(label: QLabel, text: str) -> None:
    """Set a word-wrapped label's text only when it changed (each change relayouts the window)."""
    if label.text() != text:
        label.setText(text)


class SignChangeDelegate(QStyledItemDelegate):
    """Paints the sign column: the first-column sign, and a red arrow across a row boundary
    where the sign changes from the row above."""

    def __init__(self, panel: RouthPanel):
        super().__init__(panel)
        self._panel = panel

    def paint(self, painter, option, index) -> None:
        super().paint(painter, option, index)
        if index.row() - 2 not in self._panel.change_rows:  # table row = array row + 1
            return
        rect: QRect = option.rect
        painter.save()
        pen = QPen(colour("unstable"), 1.6)
        painter.setPen(pen)
        x = rect.left() + 10
        top, mid = rect.top() + 1, rect.top() + rect.height() // 2
        painter.drawLine(x, top, x, mid)
        painter.drawLine(x - 3, mid - 4, x, mid)
        painter.drawLine(x + 3, mid - 4, x, mid)
        painter.restore()


class RouthPanel(QWidget):
    """Shows the Routh array of the newest result and its values at the current value."""

    TITLE = "Routh array"

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self._result = None
        self._value: float | None = None
        self._width_of: tuple[RouthArray | None, int] = (None, 1)
        self._layout_key: tuple | None = None  # what the table's items, spans and headers were made for
        self._shown_rows: list | None = None  # the entries whose texts the table shows
        self._values: list[list[EntryValue]] = []
        self._exact = True  # whether _values were evaluated exactly (else from the float tables)
        self._floats: tuple[RouthArray | None, FloatEntries | None] = (None, None)  # made on the first frame
        self._rest = QTimer(self)
        self._rest.setSingleShot(True)
        self._rest.setInterval(REST_MS)
        self._rest.timeout.connect(self._settle)
        self.change_rows: set[int] = set()  # array row i: the sign changes between rows i and i + 1
        self.message = MessageLabel(self)
        self.caption = QLabel(self)
        self.caption.setWordWrap(True)
        self.summary = QLabel(self)  # the first column's sign changes, always in view above the table
        self.summary.setFont(figure_font(9))
        summary = Readout(self.summary, lines=1)  # a slider frame never relayouts the panel
        self.table = QTableWidget(self)
        self.table.setFont(figure_font(9))
        self.table.setWordWrap(True)
        self.table.setTextElideMode(Qt.TextElideMode.ElideMiddle)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.ContiguousSelection)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        self.table.verticalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Fixed)
        self.table.verticalHeader().setDefaultAlignment(Qt.AlignmentFlag.AlignCenter)
        self.table.setContextMenuPolicy(Qt.ContextMenuPolicy.ActionsContextMenu)
        self.copy_action = QAction("Copy as text", self)
        self.copy_action.triggered.connect(self.copy_as_text)
        self.table.addAction(self.copy_action)
        self.notes = QLabel(self)
        self.notes.setWordWrap(True)
        self.notes.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.copy_button = QPushButton("Copy as text", self)
        self.copy_button.clicked.connect(self.copy_as_text)
        bar = QHBoxLayout()
        bar.addWidget(self.caption, 1)
        bar.addWidget(self.copy_button, 0, Qt.AlignmentFlag.AlignTop)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addWidget(self.message)
        layout.addLayout(bar)
        layout.addWidget(summary)
        layout.addWidget(self.table)
        layout.addWidget(self.notes)
        layout.addStretch(1)
        self._delegate = SignChangeDelegate(self)

    # -- public -----------------------------------------------------------------------------------
    def show_result(self, result) -> None:
        """Show a new AnalysisResult (its error message when it has no Report)."""
        self._result = result
        omitted = result.report.routh.omitted if result.report is not None else None
        self.message.show_message(result.message or (f"Routh array not shown: {omitted}" if omitted else None))
        if result.tuning_range is not None:
            self._value = result.tuning_range.nominal
        self._build()

    def changeEvent(self, event) -> None:
        if is_palette_change(event) and hasattr(self, "_delegate") and self._result is not None:
            self._build(reuse=False)  # tints and header colours follow the palette
        super().changeEvent(event)

    def set_current_value(self, value: float) -> None:
        """Re-evaluate the value columns at the tuning parameter's current value (from the float
        tables where they are provably right to the shown digits; exactly once the value rests)."""
        if float(value) == self._value and self._values:
            return  # e.g. the nominal value, announced again right after the result that showed it
        self._value = float(value)
        live = self._float_tables() is not None
        self._fill_values(live=live)
        if live:
            self._rest.start()

    @property
    def values(self) -> list[list[EntryValue]]:
        """Every entry at the current value, exact (evaluated now if the slider has not rested yet)."""
        self._settle()
        return self._values

    def _settle(self) -> None:
        if not self._exact:
            self._fill_values()

    def text(self) -> str:
        """The array as plain aligned text (same as the command line's)."""
        report = self._result.report if self._result is not None else None
        return "\n".join(routh_table(report)) if report is not None else ""

    def copy_as_text(self) -> None:
        """Put :meth:`text` on the clipboard."""
        QGuiApplication.clipboard().setText(self.text())

    # -- layout of the table ------------------------------------------------------------------------
    # Row 0 holds group headers. The first column comes first, with its value at the current value
    # and its sign right beside it, so the stability reading never scrolls out of view; the other
    # columns follow (entries, then their values).
    @property
    def _array(self) -> RouthArray | None:
        report = self._result.report if self._result is not None else None
        return report.routh if report is not None and not report.routh.omitted else None

    def _width(self) -> int:
        arr = self._array
        if self._width_of[0] is not arr:
            self._width_of = (arr, max((len(r) for r in arr.rows), default=1))
        return self._width_of[1]

    def _has_values(self) -> bool:
        return self._array is not None and self._array.parameter is not None

    def _entry_column(self, j: int) -> int:
        """Table column of array column ``j``'s symbolic entries."""
        if j == 0:
            return 0
        return self._sign_column() + j

    def _value_column(self, j: int) -> int:
        """Table column of array column ``j``'s values at the current value (-1 without them)."""
        if not self._has_values():
            return -1
        if j == 0:
            return 1
        return self._sign_column() + self._width() - 1 + j

    def _sign_column(self) -> int:
        return 2 if self._has_values() else 1

    def _build(self, reuse: bool = True) -> None:
        """Show the array. When it has the shape of the one shown (an edit of a block's gain keeps
        it), only texts that differ are changed and the table is re-sized only if any did."""
        arr = self._array
        table = self.table
        key = None if arr is None else (len(arr.rows), self._width(), arr.parameter, arr.uses_eps,
                                        tuple(arr.powers), tuple(sorted({s.row for s in arr.special})))
        if reuse and key is not None and key == self._layout_key:
            self._refresh(arr)
            return
        self._layout_key = key
        self._shown_rows = arr.rows if arr is not None else None
        table.clearSpans()
        table.clear()
        self.copy_button.setEnabled(arr is not None)
        if arr is None:
            table.setRowCount(0)
            table.setColumnCount(0)
            self.caption.setText("")
            self.summary.setText("")
            self.notes.setText("")
            return
        width = self._width()
        columns = width * (2 if self._has_values() else 1) + 1
        table.setRowCount(len(arr.rows) + 1)
        table.setColumnCount(columns)
        table.horizontalHeader().hide()
        table.setVerticalHeaderLabels([""] + [self._row_label(i) for i in range(len(arr.rows))])
        for c in range(columns):
            table.setItemDelegateForColumn(c, None)
        table.setItemDelegateForColumn(self._sign_column(), self._delegate)
        name = arr.parameter
        self._group_header(0, 1, f"first column{f' in {name}' if name else ''}")
        if self._has_values():
            self._group_header(1, 1, "")
        self._group_header(self._sign_column(), 1, "sign")
        if width > 1:
            self._group_header(self._entry_column(1), width - 1, "other columns")
            if self._has_values():
                self._group_header(self._value_column(1), width - 1, "")
        tint, special = QBrush(colour("tint")), QBrush(colour("special"))
        special_rows = {s.row for s in arr.special}
        for i, row in enumerate(self._cells()):
            for j in range(width):
                text, tip = row[j] if j < len(row) else ("", "")
                item = QTableWidgetItem(text)
                item.setTextAlignment(Qt.AlignmentFlag.AlignCenter)
                item.setToolTip(tip)
                if j == 0:
                    item.setBackground(tint)
                elif i in special_rows:
                    item.setBackground(special)
                table.setItem(i + 1, self._entry_column(j), item)
        self._fill_values_and_size()

    def _cells(self) -> list[list[tuple[str, str]]]:
        """(shown, tooltip) of every entry: ready-made on the worker thread (:func:`ready_cells`)."""
        cells = self._result.display.get(CELLS_KEY)
        return cells if cells is not None else routh_cells(self._array)

    def _refresh(self, arr: RouthArray) -> None:
        """Change the entry texts of a table made for an array of the same shape."""
        if _same_entries(self._shown_rows, arr.rows):
            self._fill_values_and_size(resize=False)  # every text is as shown: writing entries costs ~8 ms
            return
        self._shown_rows = arr.rows
        changed = False
        for i, row in enumerate(self._cells()):
            for j in range(self._width()):
                text, tip = row[j] if j < len(row) else ("", "")
                item = self.table.item(i + 1, self._entry_column(j))
                changed |= item.text() != text
                _set_text(item, text, tip)
        self._fill_values_and_size(resize=changed)

    def _fill_values_and_size(self, resize: bool = True) -> None:
        notes = self._notes_html()
        if self.notes.text() != notes:
            self.notes.setText(notes)
        self._values = []
        self._rest.stop()
        self._fill_values()
        if resize:
            self._size_columns()
            self.table.setMaximumHeight(self._content_height())

    def _size_columns(self) -> None:
        """Fit columns once per result, from font metrics (asking every cell for its size hint is
        slow). Symbolic entries are capped at :data:`ENTRY_CHARS` characters and wrap within their
        cell (full text in the tooltip); value columns get room for any value, so a slider frame
        never relayouts the table."""
        table = self.table
        metrics = table.fontMetrics()
        pad = 12
        cap = metrics.horizontalAdvance("0" * ENTRY_CHARS) + pad
        room = metrics.horizontalAdvance(f"{MINUS}0.000000e-00") + pad
        header = metrics.horizontalAdvance("first column in KK") + pad
        line = metrics.lineSpacing()
        wrapping: dict[int, list[tuple[str, int]]] = {}  # row -> its entries wider than their column
        for j in range(self._width()):
            c = self._entry_column(j)
            texts = {r: item.text() for r in range(1, table.rowCount()) if (item := table.item(r, c)) is not None}
            # an entry's first 2 * ENTRY_CHARS characters tell whether it reaches the cap: measuring
            # whole entries (thousands of characters in a big loop) is what makes sizing slow
            wide = max((metrics.horizontalAdvance(t[:2 * ENTRY_CHARS]) for t in texts.values()), default=0) + pad
            width = max(min(wide, cap), header if j == 0 else 0)
            table.setColumnWidth(c, width)
            for r, t in texts.items():
                if metrics.horizontalAdvance(t[:2 * ENTRY_CHARS]) + pad > width:
                    wrapping.setdefault(r, []).append((t, width))
            if self._has_values():
                table.setColumnWidth(self._value_column(j), room)
        flags = int(Qt.AlignmentFlag.AlignCenter) | int(Qt.TextFlag.TextWordWrap)
        for r in range(table.rowCount()):
            cells = wrapping.get(r, [])
            tallest = max((len(t) for t, _ in cells), default=0)
            heights = [metrics.boundingRect(QRect(0, 0, width - 6, 1000 * line), flags, t).height() + 1
                       for t, width in cells if len(t) >= 0.7 * tallest]  # the row's tallest is among these
            table.setRowHeight(r, max([line + 4, *heights]))
        table.setColumnWidth(self._sign_column(), 44)

    def _row_label(self, i: int) -> str:
        arr = self._array
        mark = " *" if any(s.row == i for s in arr.special) else ""
        return power_label(arr.powers[i]) + mark

    def _group_header(self, column: int, span: int, text: str) -> None:
        item = QTableWidgetItem(text)
        item.setTextAlignment(Qt.AlignmentFlag.AlignCenter)
        item.setForeground(QBrush(colour("muted")))
        self.table.setItem(0, column, item)
        if span > 1:
            self.table.setSpan(0, column, 1, span)

    def _notes_html(self) -> str:
        arr = self._array
        lines = [f"<b>* {power_label(arr.powers[s.row])}</b>: " + _powers(s.note) for s in arr.special]
        return f"<style>{number_css()}</style>" + "<br>".join(lines) if lines else ""

    def _fill_values(self, live: bool = False) -> None:
        arr = self._array
        if arr is None:
            return
        width, table = self._width(), self.table
        value = self._value if self._has_values() else None
        if self._has_values():
            name = arr.parameter
            # the value itself is in the column header: a new caption text would relayout the window
            _set_caption(self.caption, f"The first column (tinted) with its value and sign at the current {name}; "
                                       "a red arrow marks each sign change. Hover an entry for its full text.")
            table.item(0, 1).setText(f"at {name} = {number(value)}")
        else:
            _set_caption(self.caption, "The first column (tinted) and its sign; a red arrow marks each sign change.")
        self._values = self._live_values(value) if live else self._exact_values(value)
        self._exact = not live
        if self._has_values():
            tint, special = QBrush(colour("tint")), QBrush(colour("special"))
            special_rows = {s.row for s in arr.special}
            columns = [self._value_column(j) for j in range(width)]
            for i, row in enumerate(self._values):
                for j, column in enumerate(columns):
                    ev = row[j] if j < len(row) else None
                    item = table.item(i + 1, column)
                    if item is None:  # made once per result; a slider frame only changes texts
                        item = QTableWidgetItem()
                        item.setTextAlignment(Qt.AlignmentFlag.AlignCenter)
                        if j == 0:
                            item.setBackground(tint)
                        elif i in special_rows:
                            item.setBackground(special)
                        table.setItem(i + 1, column, item)
                    _set_text(item, ev.text if ev else "", ev.exact if ev else "")
        signs = [row[0].sign for row in self._values]
        changes = {i for i in range(len(signs) - 1)
                   if signs[i] is not None and signs[i + 1] is not None and signs[i] * signs[i + 1] < 0}
        if changes and changes != self.change_rows:  # the first change scrolled into view
            table.scrollToItem(table.item(min(changes) + 2, 0) or table.item(min(changes) + 1, 0))
        self.change_rows = changes
        self.summary.setText(sign_summary(signs, arr.powers))
        sign_col = self._sign_column()
        for i, s in enumerate(signs):
            item = table.item(i + 1, sign_col)
            if item is None:
                item = QTableWidgetItem()
                item.setTextAlignment(Qt.AlignmentFlag.AlignCenter)
                table.setItem(i + 1, sign_col, item)
            _set_text(item, {1: "+", -1: MINUS, 0: "0", None: "?"}[s],
                      f"sign changes between {power_label(arr.powers[i - 1])} and "
                      f"{power_label(arr.powers[i])}" if i - 1 in self.change_rows else "")
        # the arrows depend on neighbouring rows' signs: repaint the sign column (changed texts repaint themselves)
        table.viewport().update(table.columnViewportPosition(sign_col), 0, table.columnWidth(sign_col),
                                table.viewport().height())

    def _float_tables(self) -> FloatEntries | None:
        """The array's float tables (None for an ε array or one without a tuning parameter), made on
        the first slider frame after a result rather than with every result."""
        arr = self._array
        if self._floats[0] is not arr:
            usable = (arr is not None and self._has_values() and not arr.uses_eps
                      and all(isinstance(e.num, fmpq_poly) for row in arr.rows for e in row))
            self._floats = (arr, FloatEntries(arr.rows) if usable else None)
        return self._floats[1]

    def _exact_values(self, value: float | None) -> list[list[EntryValue]]:
        ready = self._result.display.get(VALUES_KEY)
        if ready is not None and ready[0] == value:
            return ready[1]
        return exact_values(self._array, value)

    def _live_values(self, value: float) -> list[list[EntryValue]]:
        """Entries from the float tables; the few they cannot vouch for evaluated exactly."""
        arr, exact = self._array, None
        out = []
        for row, floats in zip(arr.rows, self._float_tables().at(value)):
            values = []
            for entry, fast in zip(row, floats):
                if fast is None:
                    exact = to_fmpq(value) if exact is None else exact
                    values.append(evaluate_entry(entry, arr, exact))
                else:
                    values.append(EntryValue(fast[0], LIVE_TIP, fast[1]))
            out.append(values)
        return out

    def _content_height(self) -> int:
        table = self.table
        rows = sum(table.rowHeight(r) for r in range(table.rowCount()))
        bar = table.horizontalScrollBar().sizeHint().height()
        return rows + 2 * table.frameWidth() + bar + 2

    def sign_changes(self) -> int:
        """How many sign changes the first column has at the current value."""
        return len(self.change_rows)

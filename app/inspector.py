"""The inspector: the selected node's name, role, polynomials, signs and analysis role.

Numerator and denominator are parsed as you type (core.algebra.expression.block_transfer); an error is
shown under its field with the column and message, and nothing invalid reaches the model: a
field is committed on Enter or focus-out only when both fields parse, through one undoable
command (:func:`app.document.editing.block_text_command`: a new name becomes a parameter, names
no block uses any more go, in the same undo step). A name typed for the first time is flagged
under its field ("new parameter 'Tn', column 5"); a name with s run into it (``Tis``) is an error
with a suggestion, and a button declares it when it is meant as a name.
"""
from __future__ import annotations

import re

from flint import fmpq
from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QUndoStack
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QFormLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QSizePolicy,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from app.document.commands import EditNodeCommand, SetAnalysisCommand, push
from app.document.editing import block_text_command
from app.theme import error_style, figure_font, meaning_colour
from core.algebra.expression import S, block_transfer, glued_reading, read_block, to_mpoly, typed_names
from core.algebra.polynomial import decimal_text, mpoly_context, mpoly_text, to_fmpq
from core.errors import LoopwrightError
from core.model.diagram import MAX_SUM_PORTS, MIN_SUM_PORTS, ROLES, Diagram

KIND_TITLES = {"input": "Input", "output": "Output", "sum": "Summing junction", "branch": "Branch point",
               "block": "Block"}
NOTE_STYLE = "color: palette(placeholder-text); font-size: 8.5pt;"


def error_line(err: LoopwrightError) -> str:
    """``column 7: expected ')' ...`` when the error names a column, else the message; with the code."""
    match = re.search(r"column (\d+)", err.where or "")
    place = f"column {match.group(1)}: " if match else ""
    return f"{err.code} · {place}{err.message}"


def check_transfer(num: str, den: str, declared: set[str] | None = None) -> dict[str, LoopwrightError]:
    """Errors of a block's two fields, keyed ``num``/``den`` (empty when both parse together).

    Given the project's ``declared`` parameters, a name with s run into it is an error too (E111).
    """
    errors: dict[str, LoopwrightError] = {}
    for key, pair in (("num", (num, "1")), ("den", ("1", den))):
        try:
            block_transfer(*pair)
        except LoopwrightError as err:
            errors[key] = err
    if not errors:
        try:
            read_block(num, den, declared) if declared is not None else block_transfer(num, den)
        except LoopwrightError as err:
            errors["den" if "denominator" in (err.where or "") else "num"] = err
    return errors


def new_name_notes(num: str, den: str, declared: set[str]) -> dict[str, str]:
    """``{"num"/"den": "new parameter 'Tn' (column 5)"}`` for names typed for the first time."""
    notes: dict[str, list[str]] = {}
    for new in read_block(num, den, declared).new_names:
        notes.setdefault("num" if new.part == "numerator" else "den", []).append(
            f"new parameter '{new.name}' (column {new.column})")
    return {key: "; ".join(texts) for key, texts in notes.items()}


def glued_names(num: str, den: str, declared: set[str]) -> list[str]:
    """Names with s run into them that are not declared (each would be E111)."""
    return [t.name for text in (num, den) for t in typed_names(text)
            if glued_reading(t.name) is not None and t.name not in declared]


FACTOR_CHARS = 120  # a longer irreducible factor is named by its degree (the full text is in the fields)


def factored_text(num: str, den: str) -> str:
    """The block's N/D as gain · factors / factors, factored exactly over the rationals by
    python-flint (display only; fast even for ``(s+K)^199``).

    >>> factored_text("K", "s^3 + 3s^2 + 2s")
    'K / (s·(s + 1)·(s + 2))'
    >>> factored_text("0.8", "(60s+1)(8s+1)")
    '0.8 / ((8·s + 1)·(60·s + 1))'
    """
    n, d = block_transfer(num, den)
    ctx = mpoly_context(sorted(str(x) for x in (n.free_symbols | d.free_symbols) if str(x) != S))
    gain_n, top = _factor_texts(to_mpoly(n, ctx))
    gain_d, bottom = _factor_texts(to_mpoly(d, ctx))
    gain = gain_n / gain_d
    if gain != 1 or not top:
        top = [_gain_text(gain), *top]
    top_text = "·".join(top).replace("-1·", "-", 1) if top[0] == "-1" else "·".join(top)
    if not bottom:
        bare = len(top) == 1 and top_text.startswith("(") and top_text.endswith(")")
        return top_text[1:-1] if bare else top_text
    bottom_text = "·".join(bottom)
    return f"{top_text} / ({bottom_text})" if len(bottom) > 1 else f"{top_text} / {bottom_text}"


def _factor_texts(poly) -> tuple[fmpq, list[str]]:
    """The rational content and the texts of the irreducible factors (with parentheses and
    powers): factors free of s first, then by degree in s."""
    constant, factors = poly.factor()
    texts = []
    for factor, power in sorted(factors, key=_factor_order):
        text = mpoly_text(factor).replace("*", "·")
        if len(text) > FACTOR_CHARS:
            text = f"[degree {factor.degrees()[0]} in s, {len(factor)} terms]"
        elif len(factor) > 1:
            text = f"({text})"
        texts.append(f"{text}^{power}" if power > 1 else text)
    return fmpq(constant), texts


def _factor_order(pair) -> tuple:
    factor = pair[0]
    return factor.degrees()[0], factor.total_degree(), len(str(factor)), str(factor)


def _gain_text(gain: fmpq) -> str:
    """``0.8`` for gains with a short exact decimal, else ``(1/3)``; ``(≈1e-300)`` for a long one
    (also beyond the float range: ``(≈1e+400)``)."""
    short = decimal_text(gain)
    if gain.q != 1 and "e" not in short and to_fmpq(short) == gain:
        return short
    exact = str(gain) if gain.q == 1 else f"({gain})"
    return exact if len(exact) <= 24 else f"(≈{short})"


class _FieldWithError(QWidget):
    """A line edit with a small red line under it for the current parse error."""

    def __init__(self, placeholder: str, parent: QWidget | None = None):
        super().__init__(parent)
        self.edit = QLineEdit()
        self.edit.setPlaceholderText(placeholder)
        self.edit.setFont(figure_font(10))
        self.error = QLabel()
        self.error.setStyleSheet(error_style())
        self.error.setWordWrap(True)
        self.error.hide()
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.setSpacing(1)
        layout.addWidget(self.edit)
        layout.addWidget(self.error)

    def set_error(self, err: LoopwrightError | None, note: str = "") -> None:
        """Show the parse error in red, else ``note`` (new parameter names) in grey."""
        self.error.setStyleSheet(error_style() if err else NOTE_STYLE)
        self.error.setText(error_line(err) if err else note)
        self.error.setVisible(err is not None or bool(note))
        self.edit.setStyleSheet(f"QLineEdit {{ border: 1px solid {meaning_colour('unstable').name()}; }}" if err else "")

    def set_text(self, text: str) -> None:
        if self.edit.text() != text:
            self.edit.setText(text)
            self.edit.setCursorPosition(0)


class Inspector(QWidget):
    """Shows and edits one node; bind it to a document with :meth:`set_document`."""

    message = Signal(str)  # status-bar text (refused edits)

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.diagram: Diagram | None = None
        self.undo_stack: QUndoStack | None = None
        self._signals = None
        self.node_id: str | None = None

        self.header = QLabel()
        self.header.setStyleSheet("font-weight: 600; font-size: 10.5pt;")
        self.empty = QLabel("Select a node on the canvas to see and edit it here.")
        self.empty.setWordWrap(True)
        self.empty.setStyleSheet("color: palette(placeholder-text);")

        self.name = QLineEdit()
        self.name.setPlaceholderText("shown on the canvas")
        self.role = QComboBox()
        for role in ROLES:
            self.role.addItem(role.capitalize(), role)
        self.num = _FieldWithError("e.g. K (s + 2)")
        self.den = _FieldWithError("e.g. s (s + 1)")
        self.factored = QLabel()
        self.factored.setFont(figure_font(9.5))
        self.factored.setWordWrap(True)
        # a long run of digits cannot wrap: clip it rather than widen the dock (the tooltip holds it all)
        self.factored.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.factored.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.flip = QCheckBox("Drawn right to left")
        self.signs_row = QWidget()
        row = QHBoxLayout(self.signs_row)
        row.setContentsMargins(0, 0, 0, 0)
        self._signs_layout = QHBoxLayout()
        self.add_port = QToolButton(text="+ input")
        self.add_port.setToolTip("Add an input to the junction")
        self.remove_port = QToolButton(text="− input")
        self.remove_port.setToolTip("Remove the last input (it must have no wire)")
        row.addLayout(self._signs_layout)
        row.addSpacing(8)
        row.addWidget(self.add_port)
        row.addWidget(self.remove_port)
        row.addStretch(1)
        self.io_button = QPushButton()
        self.declare = QPushButton()
        self.declare.setToolTip("Declare the name as a parameter and keep the text as typed")
        self.declare.hide()
        self.refusal = QLabel()
        self.refusal.setStyleSheet(error_style())
        self.refusal.setWordWrap(True)
        self.refusal.hide()

        self.form = QFormLayout()
        self.form.setFieldGrowthPolicy(QFormLayout.FieldGrowthPolicy.AllNonFixedFieldsGrow)
        self.form.addRow("Name", self.name)
        self.form.addRow("Role", self.role)
        self.form.addRow("Numerator", self.num)
        self.form.addRow("Denominator", self.den)
        self.form.addRow("", self.declare)
        self.form.addRow("Factored", self.factored)
        self.form.addRow("", self.flip)
        self.form.addRow("Input signs", self.signs_row)
        self.form.addRow("", self.io_button)
        layout = QVBoxLayout(self)
        layout.addWidget(self.header)
        layout.addWidget(self.empty)
        layout.addLayout(self.form)
        layout.addWidget(self.refusal)
        layout.addStretch(1)
        self.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Preferred)

        self.name.editingFinished.connect(self._commit_name)
        self.role.activated.connect(self._commit_role)
        for field in (self.num, self.den):
            field.edit.textEdited.connect(self._check_typed)
            field.edit.editingFinished.connect(self.commit_transfer)
        self.flip.toggled.connect(self._commit_flip)
        self.add_port.clicked.connect(lambda: self._change_ports(+1))
        self.remove_port.clicked.connect(lambda: self._change_ports(-1))
        self.io_button.clicked.connect(self._use_for_analysis)
        self.declare.clicked.connect(self._declare_glued)
        self.show_node(None)

    # -- binding ----------------------------------------------------------------------------------
    def set_document(self, diagram: Diagram, signals, undo_stack: QUndoStack) -> None:
        """Follow another diagram (after New or Open)."""
        if self._signals is not None:
            for signal, slot in self._connections():
                signal.disconnect(slot)
        self.diagram, self._signals, self.undo_stack = diagram, signals, undo_stack
        for signal, slot in self._connections():
            signal.connect(slot)
        self.show_node(None)

    def _connections(self):
        s = self._signals
        return [(s.nodeChanged, self._on_node_event), (s.nodeRemoved, self._on_node_event),
                (s.wireAdded, self._on_wire_event), (s.wireRemoved, self._on_wire_event),
                (s.settingsChanged, self._on_settings)]

    def _on_node_event(self, node_id: str) -> None:
        if node_id == self.node_id:
            self.show_node(node_id if node_id in self.diagram.nodes else None)

    def _on_wire_event(self, key: str) -> None:
        if self.node_id and f"->{self.node_id}:" in key:
            self._refresh_ports()

    def _on_settings(self, what: str) -> None:
        if what == "analysis" and self.node_id:
            self._refresh_io()

    # -- showing ----------------------------------------------------------------------------------
    def show_nodes(self, node_ids: list[str]) -> None:
        """Follow the canvas selection: one node is shown, otherwise a short note."""
        self.show_node(node_ids[0] if len(node_ids) == 1 else None)
        if len(node_ids) > 1:
            self.empty.setText(f"{len(node_ids)} nodes selected. Select one to edit it.")

    def show_node(self, node_id: str | None) -> None:
        """Show one node (None for none); pending valid edits of the previous one are committed first."""
        if node_id != self.node_id and self.node_id is not None and self.diagram is not None \
                and self.node_id in self.diagram.nodes:
            self._commit_pending()
        node = self.diagram.nodes.get(node_id) if (self.diagram is not None and node_id) else None
        self.node_id = node.id if node else None
        self.refusal.hide()
        self.empty.setText("Select a node on the canvas to see and edit it here.")
        self.empty.setVisible(node is None)
        self.header.setVisible(node is not None)
        kind = node.kind if node else None
        for widget, kinds in ((self.name, KIND_TITLES), (self.role, ("block",)), (self.num, ("block",)),
                              (self.den, ("block",)), (self.factored, ("block",)), (self.flip, ("block",)),
                              (self.signs_row, ("sum",)), (self.io_button, ("input", "output"))):
            self.form.setRowVisible(widget, kind in kinds)
        if node is None:
            return
        self.header.setText(f"{KIND_TITLES[node.kind]} · {node.id}")
        if self.name.text() != node.label:
            self.name.setText(node.label)
        if node.kind == "block":
            self.role.setCurrentIndex(max(0, self.role.findData(node.role)))
            self.num.set_text(node.num)
            self.den.set_text(node.den)
            self.num.set_error(None)
            self.den.set_error(None)
            self.declare.hide()
            self._show_factored(node.num, node.den)
            self.flip.blockSignals(True)
            self.flip.setChecked(node.flipped)
            self.flip.blockSignals(False)
        elif node.kind == "sum":
            self._refresh_ports()
        else:
            self._refresh_io()

    def _show_factored(self, num: str, den: str) -> None:
        try:
            text = factored_text(num, den)
            self.factored.setText(text)
            self.factored.setToolTip(text)
        except LoopwrightError:
            self.factored.setText("—")
            self.factored.setToolTip("")

    def _refresh_io(self) -> None:
        node = self.diagram.nodes.get(self.node_id) if self.node_id else None
        if node is None or node.kind not in ("input", "output"):
            return
        key = node.kind
        current = getattr(self.diagram.analysis, key)
        self.io_button.setEnabled(current != node.id)
        self.io_button.setText(f"This is the analysis {key}" if current == node.id
                               else f"Use as analysis {key}")

    def _refresh_ports(self) -> None:
        node = self.diagram.nodes.get(self.node_id) if self.node_id else None
        if node is None or node.kind != "sum":
            return
        while self._signs_layout.count():
            item = self._signs_layout.takeAt(0)
            if item.widget() is not None:
                item.widget().deleteLater()
        for port, sign in enumerate(node.signs):
            button = QToolButton(text=sign.replace("-", "−"))
            button.setObjectName(f"sign{port}")
            button.setToolTip(f"Input {port + 1}: click to change its sign")
            button.setFont(figure_font(11))
            button.setFixedWidth(30)
            button.clicked.connect(lambda _=False, p=port: self._toggle_sign(p))
            self._signs_layout.addWidget(button)
        self.add_port.setEnabled(len(node.signs) < MAX_SUM_PORTS)
        self.remove_port.setEnabled(len(node.signs) > MIN_SUM_PORTS)

    # -- typing -----------------------------------------------------------------------------------
    def _check_typed(self) -> dict[str, LoopwrightError]:
        num, den = self.num.edit.text(), self.den.edit.text()
        declared = set(self.diagram.parameters) if self.diagram is not None else set()
        errors = check_transfer(num, den, declared)
        notes = new_name_notes(num, den, declared) if not errors else {}
        self.num.set_error(errors.get("num"), notes.get("num", ""))
        self.den.set_error(errors.get("den"), notes.get("den", ""))
        glued = glued_names(num, den, declared) if any(e.code == "E111" for e in errors.values()) else []
        self.declare.setText(f"Use '{glued[0]}' as a parameter name" if glued else "")
        self.declare.setVisible(bool(glued))
        if not errors:
            self._show_factored(num, den)
        return errors

    def _declare_glued(self) -> None:
        """The person means the flagged name (``Ts``) as a name: declare it and commit the text."""
        num, den = self.num.edit.text().strip(), self.den.edit.text().strip()
        self.commit_transfer(confirmed=set(glued_names(num, den, set(self.diagram.parameters))))

    def _commit_pending(self) -> None:
        node = self.diagram.nodes[self.node_id]
        if node.kind == "block":
            self.commit_transfer()
        if self.name.text() != node.label:
            self._commit_name()

    # -- commits ----------------------------------------------------------------------------------
    def _node(self):
        if self.diagram is None or self.node_id not in (self.diagram.nodes if self.diagram else {}):
            return None
        return self.diagram.nodes[self.node_id]

    def _push(self, command) -> bool:
        try:
            push(self.undo_stack, command)
        except LoopwrightError as err:
            self.refusal.setText(str(err))
            self.refusal.show()
            self.message.emit(str(err))
            self.show_node(self.node_id)
            self.refusal.show()
            return False
        self.refusal.hide()
        return True

    def commit_transfer(self, confirmed: set[str] | None = None) -> bool:
        """Put the typed numerator and denominator into the model if they parse; True if committed.

        ``confirmed`` names (with s run into them) are declared as parameters in the same step.
        """
        node = self._node()
        if node is None or node.kind != "block":
            return False
        num, den = self.num.edit.text().strip(), self.den.edit.text().strip()
        if (num, den) == (node.num, node.den):
            self.num.set_error(None)
            self.den.set_error(None)
            self.declare.hide()
            return False
        if not confirmed and self._check_typed():
            return False
        try:
            command = block_text_command(self.diagram, node.id, num, den, confirmed or ())
        except LoopwrightError as err:
            self.refusal.setText(str(err))
            self.refusal.show()
            return False
        self.declare.hide()
        return command is not None and self._push(command)

    def _commit_name(self) -> None:
        node = self._node()
        if node is not None and self.name.text() != node.label:
            self._push(EditNodeCommand(self.diagram, node.id, label=self.name.text()))

    def _commit_role(self) -> None:
        node = self._node()
        role = self.role.currentData()
        if node is not None and node.kind == "block" and role != node.role:
            self._push(EditNodeCommand(self.diagram, node.id, role=role))

    def _commit_flip(self, checked: bool) -> None:
        node = self._node()
        if node is not None and node.kind == "block" and checked != node.flipped:
            self._push(EditNodeCommand(self.diagram, node.id, flipped=checked))

    def _toggle_sign(self, port: int) -> None:
        node = self._node()
        if node is None or node.kind != "sum":
            return
        signs = list(node.signs)
        signs[port] = "-" if signs[port] == "+" else "+"
        self._push(EditNodeCommand(self.diagram, node.id, signs="".join(signs)))

    def _change_ports(self, delta: int) -> None:
        node = self._node()
        if node is None or node.kind != "sum":
            return
        signs = node.signs + "+" if delta > 0 else node.signs[:-1]
        self._push(EditNodeCommand(self.diagram, node.id, signs=signs))

    def _use_for_analysis(self) -> None:
        node = self._node()
        if node is not None and node.kind in ("input", "output"):
            self._push(SetAnalysisCommand(self.diagram, **{node.kind: node.id}))

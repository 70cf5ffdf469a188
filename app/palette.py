"""The node palette: click an entry to place it, or drag it onto the canvas.

Drags carry :data:`app.canvas.NODE_MIME` with ``"kind:role"`` as payload (for a summing
junction the "role" is its input count, e.g. ``"sum:3"``).
"""
from __future__ import annotations

from PySide6.QtCore import QEvent, QMimeData, QPoint, QPointF, QRectF, QSize, Qt, Signal
from PySide6.QtGui import QDrag, QPainter, QPen, QPixmap
from PySide6.QtWidgets import (
    QApplication,
    QGridLayout,
    QLabel,
    QSizePolicy,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from app.canvas import NODE_MIME
from app.document.editor import DiagramEditor

from .theme import Theme, current_theme, label_font

# (section, entries of (short label, full name, kind, role)); the short label keeps the palette narrow
ENTRIES = [
    ("Signals", [("Input", "Input", "input", ""), ("Output", "Output", "output", "")]),
    ("Junctions", [("\u03a3 2 in", "Summing junction with 2 inputs", "sum", "2"),
                   ("\u03a3 3 in", "Summing junction with 3 inputs", "sum", "3"),
                   ("\u03a3 4 in", "Summing junction with 4 inputs", "sum", "4"),
                   ("Branch", "Branch point (one signal to several places)", "branch", "")]),
    ("Blocks", [("Gain", "Gain block", "block", "gain"), ("Controller", "Controller block", "block", "controller"),
                ("Actuator", "Actuator block", "block", "actuator"), ("Plant", "Plant block", "block", "plant"),
                ("Sensor", "Sensor block", "block", "sensor"), ("Other", "Block of another role", "block", "other")]),
]
ICON = 28


def entry_icon(kind: str, role: str, size: int = ICON, theme: Theme | None = None) -> QPixmap:
    """A small drawing of the node in the canvas' own style: a block with its role band, a
    summing junction with its signs, a branch dot on a wire, an input or output terminal."""
    t = theme or current_theme()
    ratio = 2  # drawn at twice the size: crisp on high-density screens
    pixmap = QPixmap(size * ratio, size * ratio)
    pixmap.setDevicePixelRatio(ratio)
    pixmap.fill(Qt.GlobalColor.transparent)
    p = QPainter(pixmap)
    p.setRenderHint(QPainter.RenderHint.Antialiasing)
    p.setRenderHint(QPainter.RenderHint.TextAntialiasing)
    p.setPen(QPen(t.outline, 1.2))
    p.setBrush(t.block_fill)
    mid = size / 2
    wire = QPen(t.wire, 1.2)
    if kind == "block":
        rect = QRectF(3.5, 7.5, size - 7, size - 15)
        p.drawRoundedRect(rect, 2.5, 2.5)
        p.save()
        p.setPen(Qt.PenStyle.NoPen)
        p.setBrush(t.role_band(role))
        p.drawRoundedRect(QRectF(rect.left() + 0.6, rect.top() + 0.6, rect.width() - 1.2, 3.4), 1.5, 1.5)
        p.restore()
        p.setPen(QPen(t.muted_text, 1.0))
        p.drawLine(QPointF(mid - 5, mid + 2.5), QPointF(mid + 5, mid + 2.5))  # a fraction rule
    elif kind == "sum":
        r = size / 2 - 7
        p.setPen(wire)
        p.drawLine(QPointF(1, mid), QPointF(mid - r, mid))
        p.drawLine(QPointF(mid + r, mid), QPointF(size - 1, mid))
        p.setPen(QPen(t.outline, 1.2))
        p.drawEllipse(QPointF(mid, mid), r, r)
        p.setFont(label_font(6.5, bold=True))
        p.setPen(t.text)
        p.drawText(QRectF(mid - 5, mid - 5, 10, 10), Qt.AlignmentFlag.AlignCenter, role)
        p.drawText(QRectF(1, mid - 11, 8, 8), Qt.AlignmentFlag.AlignCenter, "+")
    elif kind == "branch":
        p.setPen(wire)
        p.drawLine(QPointF(2, mid), QPointF(size - 2, mid))
        p.drawLine(QPointF(mid, mid), QPointF(mid, size - 3))
        p.setPen(Qt.PenStyle.NoPen)
        p.setBrush(t.wire)
        p.drawEllipse(QPointF(mid, mid), 3, 3)
    else:
        x = 7.0 if kind == "input" else size - 7.0
        p.setPen(wire)
        p.drawLine(QPointF(x, mid), QPointF(size - 2 if kind == "input" else 2, mid))
        p.setPen(QPen(t.outline, 1.2))
        p.drawEllipse(QPointF(x, mid), 3.5, 3.5)
    p.end()
    return pixmap


class PaletteButton(QToolButton):
    """One palette entry: a click asks to place the node, a drag carries it to the canvas."""

    placeRequested = Signal(str, str)

    def __init__(self, text: str, name: str, kind: str, role: str, parent: QWidget | None = None):
        super().__init__(parent)
        self.kind, self.role, self.name = kind, role, name
        self.setText(text)
        self.setFont(label_font(8))
        self.setIconSize(QSize(ICON, ICON))
        self.refresh_icon()
        self.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextUnderIcon)
        self.setAutoRaise(True)
        self.setToolTip(f"<b>{name}</b><br>Click to place it on the canvas, or drag it there.")
        self.setStatusTip(f"{name}: click to place, or drag onto the canvas")
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self._press: QPoint | None = None
        self.clicked.connect(lambda: self.placeRequested.emit(self.kind, self.role))

    def refresh_icon(self) -> None:
        """Draw the icon again in the current light or dark theme."""
        self.setIcon(entry_icon(self.kind, self.role))

    def mime_payload(self) -> bytes:
        return f"{self.kind}:{self.role}".encode()

    def mousePressEvent(self, event) -> None:
        if event.button() == Qt.MouseButton.LeftButton:
            self._press = event.position().toPoint()
        super().mousePressEvent(event)

    def mouseMoveEvent(self, event) -> None:
        if self._press is not None and (event.position().toPoint() - self._press).manhattanLength() \
                >= QApplication.startDragDistance():
            self._press = None
            self.setDown(False)
            mime = QMimeData()
            mime.setData(NODE_MIME, self.mime_payload())
            drag = QDrag(self)
            drag.setMimeData(mime)
            drag.setPixmap(entry_icon(self.kind, self.role, 36))
            drag.exec(Qt.DropAction.CopyAction)
            return
        super().mouseMoveEvent(event)

    def mouseReleaseEvent(self, event) -> None:
        self._press = None
        super().mouseReleaseEvent(event)


class Palette(QWidget):
    """Buttons for every node kind and block role; placing goes through ``editor.place_node``."""

    def __init__(self, editor: DiagramEditor | None, parent: QWidget | None = None):
        super().__init__(parent)
        self.editor = editor
        self.buttons: dict[tuple[str, str], PaletteButton] = {}
        self._muted: list[QLabel] = []
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 2, 4, 4)
        layout.setSpacing(0)
        for section, entries in ENTRIES:
            heading = QLabel(section.upper())
            heading.setFont(label_font(7, bold=True))
            heading.setContentsMargins(3, 8, 0, 2)
            self._muted.append(heading)
            layout.addWidget(heading)
            grid = QGridLayout()
            grid.setSpacing(0)
            for i, (text, name, kind, role) in enumerate(entries):
                button = PaletteButton(text, name, kind, role, self)
                button.placeRequested.connect(self.place)
                self.buttons[(kind, role)] = button
                grid.addWidget(button, i // 2, i % 2)
            layout.addLayout(grid)
        hint = QLabel("Click to place, or drag onto the canvas. Drag from an output to an input "
                      "to draw a wire.", self)
        hint.setWordWrap(True)
        hint.setFont(label_font(7.5))
        hint.setContentsMargins(3, 10, 3, 0)
        self._muted.append(hint)
        layout.addWidget(hint)
        layout.addStretch(1)
        self.setSizePolicy(QSizePolicy.Policy.Fixed, QSizePolicy.Policy.Preferred)
        self._apply_theme()

    def sizeHint(self) -> QSize:
        return QSize(self.minimumSizeHint().width(), super().sizeHint().height())

    def _apply_theme(self) -> None:
        muted = current_theme().muted_text.name()
        for label in self._muted:
            label.setStyleSheet(f"color: {muted};")
        for button in self.buttons.values():
            button.refresh_icon()

    def changeEvent(self, event) -> None:
        if event.type() in (QEvent.Type.PaletteChange, QEvent.Type.ApplicationPaletteChange):
            self._apply_theme()
        super().changeEvent(event)

    def set_editor(self, editor: DiagramEditor) -> None:
        """Place through another editor (after a project was opened)."""
        self.editor = editor

    def place(self, kind: str, role: str) -> str | None:
        """Place a node at the next free spot near the view centre; returns its id."""
        return self.editor.place_node(kind, role)

"""The node palette: click an entry to place it, or drag it onto the canvas.

Drags carry :data:`app.canvas.NODE_MIME` with ``"kind:role"`` as payload (for a summing
junction the "role" is its input count, e.g. ``"sum:3"``).
"""
from __future__ import annotations

from PySide6.QtCore import QMimeData, QPoint, QRectF, QSize, Qt, Signal
from PySide6.QtGui import QColor, QDrag, QPainter, QPen, QPixmap
from PySide6.QtWidgets import QApplication, QLabel, QSizePolicy, QToolButton, QVBoxLayout, QWidget

from .canvas import NODE_MIME, DiagramScene
from .theme import ROLE_COLOURS, label_font

# (section, entries of (text, kind, role))
ENTRIES = [
    ("Signals", [("Input", "input", ""), ("Output", "output", "")]),
    ("Junctions", [("Summing junction (2 inputs)", "sum", "2"), ("Summing junction (3 inputs)", "sum", "3"),
                   ("Summing junction (4 inputs)", "sum", "4"), ("Branch point", "branch", "")]),
    ("Blocks", [("Gain", "block", "gain"), ("Controller", "block", "controller"),
                ("Actuator", "block", "actuator"), ("Plant", "block", "plant"),
                ("Sensor", "block", "sensor"), ("Other", "block", "other")]),
]


def entry_icon(kind: str, role: str, size: int = 22) -> QPixmap:
    """A small drawing of the node: a block with its role band, a circle, a dot or a terminal."""
    pixmap = QPixmap(size, size)
    pixmap.fill(Qt.GlobalColor.transparent)
    p = QPainter(pixmap)
    p.setRenderHint(QPainter.RenderHint.Antialiasing)
    pen = QPen(QColor("#2b3038"), 1.2)
    p.setPen(pen)
    p.setBrush(QColor("#ffffff"))
    if kind == "block":
        rect = QRectF(2.5, 5.5, size - 5, size - 11)
        p.drawRoundedRect(rect, 2.5, 2.5)
        p.fillRect(QRectF(rect.left() + 0.6, rect.top() + 0.6, rect.width() - 1.2, 3), QColor(ROLE_COLOURS[role]))
    elif kind == "sum":
        p.drawEllipse(QRectF(4.5, 4.5, size - 9, size - 9))
        p.setFont(label_font(6.5, bold=True))
        p.drawText(QRectF(0, 0, size, size), Qt.AlignmentFlag.AlignCenter, role)
    elif kind == "branch":
        p.setBrush(QColor("#4a4f57"))
        p.drawLine(2, size // 2, size - 2, size // 2)
        p.drawEllipse(QRectF(size / 2 - 3, size / 2 - 3, 6, 6))
    else:
        x = 6.0 if kind == "input" else size - 6.0
        p.drawLine(int(x), size // 2, size - 2 if kind == "input" else 2, size // 2)
        p.drawEllipse(QRectF(x - 3.5, size / 2 - 3.5, 7, 7))
    p.end()
    return pixmap


class PaletteButton(QToolButton):
    """One palette entry: a click asks to place the node, a drag carries it to the canvas."""

    placeRequested = Signal(str, str)

    def __init__(self, text: str, kind: str, role: str, parent: QWidget | None = None):
        super().__init__(parent)
        self.kind, self.role = kind, role
        self.setText(text)
        self.setIcon(entry_icon(kind, role))
        self.setIconSize(QSize(22, 22))
        self.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        self.setAutoRaise(True)
        self.setToolTip(f"Click to place a {text.lower()}, or drag it onto the canvas")
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self._press: QPoint | None = None
        self.clicked.connect(lambda: self.placeRequested.emit(self.kind, self.role))

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
            drag.setPixmap(entry_icon(self.kind, self.role, 32))
            drag.exec(Qt.DropAction.CopyAction)
            return
        super().mouseMoveEvent(event)

    def mouseReleaseEvent(self, event) -> None:
        self._press = None
        super().mouseReleaseEvent(event)


class Palette(QWidget):
    """Buttons for every node kind and block role; placing goes through ``scene.place_node``."""

    def __init__(self, scene: DiagramScene, parent: QWidget | None = None):
        super().__init__(parent)
        self.scene = scene
        self.buttons: dict[tuple[str, str], PaletteButton] = {}
        layout = QVBoxLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        layout.setSpacing(1)
        for section, entries in ENTRIES:
            heading = QLabel(section)
            heading.setFont(label_font(8.5, bold=True))
            heading.setContentsMargins(2, 8, 0, 2)
            layout.addWidget(heading)
            for text, kind, role in entries:
                button = PaletteButton(text, kind, role, self)
                button.placeRequested.connect(self.place)
                self.buttons[(kind, role)] = button
                layout.addWidget(button)
        layout.addStretch(1)

    def set_scene(self, scene: DiagramScene) -> None:
        """Place into another scene (after a project was opened)."""
        self.scene = scene

    def place(self, kind: str, role: str) -> str | None:
        """Place a node at the next free spot near the view centre; returns its id."""
        return self.scene.place_node(kind, role)

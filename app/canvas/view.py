"""The canvas view: zoom (Ctrl+wheel, +/- keys), pan (middle mouse or Space+drag), fit all."""
from __future__ import annotations

from PySide6.QtCore import QEvent, QPoint, QRectF, Qt
from PySide6.QtGui import QPainter
from PySide6.QtWidgets import QGraphicsView

from ..theme import current_theme
from .scene import DiagramScene

MIN_ZOOM, MAX_ZOOM, ZOOM_STEP = 0.2, 4.0, 1.2


class DiagramView(QGraphicsView):
    """Shows a :class:`DiagramScene`; rubber-band selection on empty space."""

    def __init__(self, scene: DiagramScene, parent=None):
        super().__init__(scene, parent)
        self.setRenderHints(QPainter.RenderHint.Antialiasing | QPainter.RenderHint.TextAntialiasing
                            | QPainter.RenderHint.SmoothPixmapTransform)
        self.setDragMode(QGraphicsView.DragMode.RubberBandDrag)
        self.setTransformationAnchor(QGraphicsView.ViewportAnchor.AnchorUnderMouse)
        self.setViewportUpdateMode(QGraphicsView.ViewportUpdateMode.FullViewportUpdate)
        self.setAcceptDrops(True)
        self.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.setFocusPolicy(Qt.FocusPolicy.StrongFocus)
        self._pan: PanGesture | None = None
        self._space_held = False

    def zoom(self) -> float:
        """Current scale factor (1 = 100 %)."""
        return self.transform().m11()

    def set_zoom(self, factor: float) -> None:
        """Scale to ``factor`` (clamped to 20 %..400 %)."""
        factor = min(MAX_ZOOM, max(MIN_ZOOM, factor))
        self.scale(factor / self.zoom(), factor / self.zoom())

    def zoom_by(self, step: float) -> None:
        self.set_zoom(self.zoom() * step)

    def fit_all(self, margin: float = 40.0, max_zoom: float = 1.5) -> None:
        """Show every item, zooming in at most to ``max_zoom``."""
        rect = QRectF()
        for item in list(self.scene().node_items.values()) + list(self.scene().wire_items.values()):
            rect = rect.united(item.sceneBoundingRect())
        if rect.isEmpty():
            self.resetTransform()
            self.centerOn(0, 0)
            return
        rect = rect.adjusted(-margin, -margin, margin, margin)
        self.fitInView(rect, Qt.AspectRatioMode.KeepAspectRatio)
        if self.zoom() > max_zoom:
            self.set_zoom(max_zoom)
        self.centerOn(rect.center())

    def changeEvent(self, event) -> None:
        """Follow a switch between the light and dark palettes."""
        if event.type() in (QEvent.Type.PaletteChange, QEvent.Type.ApplicationPaletteChange):
            scene = self.scene()
            theme = current_theme()
            if isinstance(scene, DiagramScene) and scene.theme != theme:
                scene.set_theme(theme)
        super().changeEvent(event)

    # -- input --------------------------------------------------------------------------------
    def wheelEvent(self, event) -> None:
        if event.modifiers() & Qt.KeyboardModifier.ControlModifier:
            self.zoom_by(ZOOM_STEP if event.angleDelta().y() > 0 else 1 / ZOOM_STEP)
            event.accept()
        else:
            super().wheelEvent(event)

    def keyPressEvent(self, event) -> None:
        key = event.key()
        if key in (Qt.Key.Key_Plus, Qt.Key.Key_Equal):
            self.zoom_by(ZOOM_STEP)
        elif key == Qt.Key.Key_Minus:
            self.zoom_by(1 / ZOOM_STEP)
        elif key == Qt.Key.Key_Space and not event.isAutoRepeat():
            self._space_held = True
            self.viewport().setCursor(Qt.CursorShape.OpenHandCursor)
        else:
            super().keyPressEvent(event)

    def keyReleaseEvent(self, event) -> None:
        if event.key() == Qt.Key.Key_Space and not event.isAutoRepeat():
            self._space_held = False
            self.viewport().unsetCursor()
        super().keyReleaseEvent(event)

    def mousePressEvent(self, event) -> None:
        left_with_space = event.button() == Qt.MouseButton.LeftButton and self._space_held
        if event.button() == Qt.MouseButton.MiddleButton or left_with_space:
            self._pan = PanGesture(self, event.position().toPoint())
            self.viewport().setCursor(Qt.CursorShape.ClosedHandCursor)
            event.accept()
            return
        super().mousePressEvent(event)

    def mouseMoveEvent(self, event) -> None:
        if self._pan is not None:
            self._pan.move(event.position().toPoint())
            event.accept()
            return
        super().mouseMoveEvent(event)

    def mouseReleaseEvent(self, event) -> None:
        if self._pan is not None:
            self._pan.release(event.position().toPoint())
            self._pan = None
            self.viewport().unsetCursor()
            event.accept()
            return
        super().mouseReleaseEvent(event)


class PanGesture:
    """Middle-button or Space+drag: scroll the view with the mouse."""

    def __init__(self, view: QGraphicsView, pos: QPoint):
        self.view, self.last = view, QPoint(pos)

    def move(self, pos: QPoint) -> None:
        d = pos - self.last
        self.last = QPoint(pos)
        h, v = self.view.horizontalScrollBar(), self.view.verticalScrollBar()
        h.setValue(h.value() - d.x())
        v.setValue(v.value() - d.y())

    def release(self, pos: QPoint) -> None:
        self.move(pos)

    def cancel(self) -> None:
        pass

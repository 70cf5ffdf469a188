"""The block-diagram canvas: scene mirroring the model, one item class per file, gestures, view."""
from .scene import CLIPBOARD_MIME, NODE_MIME, DiagramScene
from .view import DiagramView

__all__ = ["CLIPBOARD_MIME", "NODE_MIME", "DiagramScene", "DiagramView"]

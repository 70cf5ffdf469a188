"""The block-diagram canvas: scene mirroring the model, one item class per file, gestures, view."""
from .scene import NODE_MIME, DiagramScene
from .view import DiagramView

__all__ = ["NODE_MIME", "DiagramScene", "DiagramView"]

"""Editing: the undo commands (each calls model methods only), the canvas gestures that make them,
and the editor that turns the user's intents (clicks, keys, drops, panel edits) into commands.
The canvas mirrors the model and never imports this package; this package drives the canvas."""

"""The keyboard-only terminal app over the acidbase library (``acidbase tui``)."""

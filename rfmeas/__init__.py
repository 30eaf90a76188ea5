"""rfmeas: characterise hand-wound small-signal transformers from measurements."""

__version__ = "0.1.0"

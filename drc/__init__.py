"""drc: a design-rule checker for indicator-LED circuits on low-voltage rails."""

__version__ = "0.1.0"

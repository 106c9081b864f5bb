"""Arrowmoot: agree a causal diagram in a workshop, then estimate what it identifies."""

__version__ = "0.1.0"

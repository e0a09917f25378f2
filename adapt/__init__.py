"""Continued-pretraining domain adaptation of text encoders."""

__version__ = "0.1.0"

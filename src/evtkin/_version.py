"""The evtkin version: a leaf module, so that every layer can name the version without
importing the package root."""

from __future__ import annotations

__version__ = "0.1.0"

"""Dossier: weigh the evidence that the stars of a multiple system belong together."""

from __future__ import annotations

__version__ = "0.1.0"

"""Errors of the soil-water and nutrient capture model."""

from __future__ import annotations

from ..errors import RootsimError

__all__ = ["CaptureError"]


class CaptureError(RootsimError, ValueError):
    """A soil-water file, a weather table or a capture option is invalid (one-line message)."""

"""Base class of every input schema: strict about unknown fields, immutable once read."""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict

__all__ = ["Strict"]


class Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, str_strip_whitespace=True)

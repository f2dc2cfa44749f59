"""Case files: read a TOML case folder into a :class:`~fieldenergy.model.Case`, and write one back."""

from __future__ import annotations

from fieldenergy.caseio._reader import read_case, read_case_document, read_case_toml
from fieldenergy.caseio._writer import write_case

__all__ = ["read_case", "read_case_document", "read_case_toml", "write_case"]

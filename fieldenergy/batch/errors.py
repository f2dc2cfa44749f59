"""The error a batch raises when it cannot start at all."""

from __future__ import annotations

from fieldenergy.errors import FieldEnergyError


class BatchError(FieldEnergyError):
    """A batch cannot run: the folder is missing or holds no case, or the cluster is unreachable.

    A failing case never raises this: it is recorded in the batch summary and the batch goes on.
    """

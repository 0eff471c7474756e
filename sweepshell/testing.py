"""Tools for model authors: the contract suite every model keeps, and a cheap model to try things on.

``check_model(MyModel)`` runs the checks sweepshell runs over its own models (see
:mod:`sweepshell.models.contract`); ``WinklerColumnModel`` is the closed-form test model.
"""

from __future__ import annotations

from sweepshell.models.contract import ModelContractError, check_model
from sweepshell.models.winkler_column.model import WinklerColumnModel, winkler_column_critical

__all__ = ["ModelContractError", "WinklerColumnModel", "check_model", "winkler_column_critical"]

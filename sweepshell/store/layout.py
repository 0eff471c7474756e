"""Every name of the store layout lives here: variables, attributes, schema version.

A store is one zarr (format 3) group written through xarray, so ``xr.open_zarr(path)``
works without sweepshell. Dimensions are the sweep axes in plan order, then any extra
output dimensions of the model.
"""

from __future__ import annotations

from sweepshell.models.base import Status

__all__ = [
    "ATTR",
    "REGIME_VAR",
    "SCHEMA_VERSION",
    "STATUS_FLAG_MEANINGS",
    "STATUS_FLAG_VALUES",
    "STATUS_VAR",
    "TEMP_SUFFIX",
    "regime_attrs",
    "status_attrs",
]

#: version of the layout below; readers refuse stores with a version they do not know
SCHEMA_VERSION = 1

STATUS_VAR = "status"
REGIME_VAR = "regime"

#: suffix of the folder a template is built in before it is renamed into place
TEMP_SUFFIX = ".sweepshell-tmp"


class ATTR:
    """Names of the group attributes (all values are plain JSON types or JSON strings)."""

    tool = "sweepshell_version"
    schema = "sweepshell_schema"
    model = "model"
    model_version = "model_version"
    model_package = "model_package"                # distribution providing the model (sweepshell for built-ins)
    model_package_version = "model_package_version"
    settings = "model_settings_json"
    fixed = "fixed_parameters_json"
    axes = "axes_json"
    sweep_yaml = "sweep_yaml"
    sweep_name = "sweep_name"
    created = "created"
    caution = "caution"
    block_shape = "block_shape"
    regimes = "regimes"
    conventions = "Conventions"


STATUS_FLAG_VALUES = [int(s) for s in Status]
STATUS_FLAG_MEANINGS = " ".join(s.name for s in Status)


def status_attrs() -> dict[str, object]:
    """Return the CF attributes of the ledger variable."""
    return {
        "long_name": "point status (ledger)",
        "flag_values": STATUS_FLAG_VALUES,
        "flag_meanings": STATUS_FLAG_MEANINGS,
        "comment": "only ok and no_instability carry trustworthy values; 0 pending = not computed yet",
    }


def regime_attrs(regimes: tuple[str, ...]) -> dict[str, object]:
    """Return the CF attributes of the regime variable for a model's regime labels."""
    return {
        "long_name": "regime (behaviour at the point)",
        "flag_values": [-1, *range(len(regimes))],
        "flag_meanings": " ".join(("none", *regimes)),
        "comment": "-1 none: the point has no trustworthy status",
    }

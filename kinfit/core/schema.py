"""Schema versions of the JSON files kinfit writes, and the check its readers make.

Every JSON file kinfit writes starts with a ``"schema"`` key naming what it
holds and the major version of its layout, e.g. ``"kinfit.result/1"``. A
reader of kinfit's own files (the HTML report, ``kinfit simulate --fit``)
accepts a file without the key (written before versions were recorded) and
a file of the same kind and major version; it refuses another kind or
another major version with one clear line. A change that only adds keys
keeps the major version; a change that renames, removes or reinterprets a
key raises it.
"""

from __future__ import annotations

from kinfit.core.atomic import json_text
from kinfit.core.errors import KinfitError

__all__ = ["SCHEMAS", "schema_json", "check_schema"]

SCHEMAS = {
    "result": "kinfit.result/1",            # result.json: FitResult.to_dict
    "posterior": "kinfit.posterior/1",      # posterior.json: Posterior.to_dict
    "ranking": "kinfit.ranking/1",          # ranking.json: Comparison.to_dict
    "temperature": "kinfit.temperature/1",  # temperature.json: activation, two-stage, basis
    "prediction": "kinfit.prediction/1",    # prediction.json: Prediction.to_dict + cautions
    "signals": "kinfit.signals/1",          # spectra.json: SignalFit.to_dict
    "provenance": "kinfit.provenance/1",    # provenance.json: provenance.collect
}


def schema_json(kind, data):
    """JSON text of `data` with ``"schema": SCHEMAS[kind]`` as its first key.

    Parameters
    ----------
    kind : str
        A key of :data:`SCHEMAS`.
    data : dict
        Plain data (cleaned by :func:`kinfit.core.atomic.jsonable`).

    Returns
    -------
    str
    """
    rest = {key: value for key, value in data.items() if key != "schema"}
    return json_text({"schema": SCHEMAS[kind], **rest})


def _split(tag):
    """("kinfit.result", 1) from "kinfit.result/1" (a minor part "1.2" is allowed)."""
    name, sep, version = str(tag).partition("/")
    major = version.split(".")[0]
    if not sep or not major.isdigit():
        return name, None
    return name, int(major)


def check_schema(data, kind, source):
    """Refuse `data` read from `source` if it declares another kind or major version.

    Parameters
    ----------
    data : object
        Parsed JSON; anything but a dict with a ``"schema"`` key passes.
    kind : str
        A key of :data:`SCHEMAS`.
    source : str or os.PathLike
        Named in the message.

    Returns
    -------
    object
        `data`, unchanged.

    Raises
    ------
    KinfitError
        If the declared schema is of another kind or another major version.
    """
    if not isinstance(data, dict) or "schema" not in data:
        return data
    tag = data["schema"]
    name, major = _split(tag)
    want_name, want_major = _split(SCHEMAS[kind])
    if name != want_name:
        raise KinfitError(f"{source}: holds {tag!r}, not a {want_name} file; give the "
                          f"{kind} file kinfit wrote")
    if major != want_major:
        raise KinfitError(f"{source}: schema {tag!r} is not one this kinfit reads "
                          f"({SCHEMAS[kind]}); it was written by another version of kinfit")
    return data

"""Helpers shared by the store tests."""

import copy

from server.errors import InputError


def stand_in_validate_model(model):
    """Checks a few fields of the contract only; used while server/io/model_file.py is absent."""
    if not isinstance(model, dict):
        raise InputError("", "the model file must be a JSON object")
    if model.get("schema") != "probewise/1":
        raise InputError("schema", "must be 'probewise/1'")
    if not isinstance(model.get("name"), str) or not model["name"].strip():
        raise InputError("name", "must be a non-empty text")
    units = model.get("units")
    if not isinstance(units, list) or not units:
        raise InputError("units", "must be a non-empty list")
    return copy.deepcopy(model)

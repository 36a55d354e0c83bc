"""Reading a project for the command line and the web: model file in, core project out,
layouts found by name (the one lookup, for the core project and for the model document)."""

from __future__ import annotations

from probewise.core.model import Layout, Project
from probewise.errors import InputError


def read_model(path: str) -> dict:
    """Read and validate a model file (InputError naming MODEL on any fault)."""
    from probewise.io.model_file import load_model_file

    return load_model_file(path)


def write_model(model: dict, path: str) -> None:
    """Write a model file in canonical form (validated), replacing OUT only when complete."""
    from probewise.io.exports import write_text_file
    from probewise.io.model_file import dump_model

    write_text_file(dump_model(model), path)


def core_project(model: dict) -> Project:
    """A validated model document as the core's frozen dataclasses."""
    from probewise.app.to_core import to_core

    try:
        return to_core(model)
    except InputError:  # a history bound that conflicts with another (to_core checks)
        raise
    except (KeyError, TypeError, ValueError) as exc:  # the validator should have caught it
        raise InputError("model", f"cannot be used: {exc}") from None


def load_project(path: str) -> tuple[dict, Project]:
    """Read, validate and convert a model file; bad input raises InputError."""
    model = read_model(path)
    return model, core_project(model)


def layout_names(project: Project) -> list[str]:
    return [layout.name for layout in project.layouts]


def find_layout(project: Project, name: str, field: str = "--layout") -> Layout:
    """The project's layout of that name; InputError naming ``field`` and the known names."""
    for layout in project.layouts:
        if layout.name == name:
            return layout
    known = ", ".join(repr(n) for n in layout_names(project)) or "(none)"
    raise InputError(field, f"no layout named {name!r}; layouts are: {known}")


def layout_position(model: dict, name: str) -> int | None:
    """Index in ``model["layouts"]`` of the layout of that name; None when there is none."""
    for i, layout in enumerate(model.get("layouts") or []):
        if layout["name"] == name:
            return i
    return None


def model_layout(model: dict, name: str | None) -> dict | None:
    """The model document's layout of that name; None when there is none (or no name)."""
    i = None if name is None else layout_position(model, name)
    return None if i is None else model["layouts"][i]

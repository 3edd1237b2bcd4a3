"""Files: reading TOML, displaying paths, and finding the built-in definitions."""
from __future__ import annotations

import os
import sys
from pathlib import Path

from ..errors import DefinitionError, did_you_mean, problem

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

__all__ = ["builtin_dir", "builtin_names", "resolve_definition"]


def _display(path):
    path = Path(path)
    try:
        return os.path.relpath(path)
    except ValueError:  # pragma: no cover - other drive on Windows
        return str(path)


def _read_toml(path, kind):
    where = _display(path)
    try:
        with open(path, "rb") as fh:
            return tomllib.load(fh), where
    except FileNotFoundError:
        raise DefinitionError(problem(where, f"{kind} file not found", "check the path or the name")) from None
    except tomllib.TOMLDecodeError as exc:
        raise DefinitionError(problem(where, f"not valid TOML ({exc})", "fix the syntax at that line")) from None
    except (IsADirectoryError, PermissionError, UnicodeDecodeError) as exc:
        raise DefinitionError(problem(where, f"cannot be read ({exc.__class__.__name__})",
                                      f"give the path of a readable {kind} .toml file")) from None


# --------------------------------------------------------------------------- built-ins
def builtin_dir(kind):
    """Folder of the built-in definitions of one kind ("paradigms" or "features").

    Inside an installed wheel they sit in the package; in a source checkout (editable
    install) at the repository root.
    """
    here = Path(__file__).resolve().parent.parent  # the heschl package folder
    for candidate in (here / kind, here.parent / kind):
        if candidate.is_dir():
            return candidate
    raise DefinitionError(problem(str(here), f'built-in folder "{kind}" is missing from the installation',
                                  "reinstall heschl"))


def builtin_names(kind):
    """Sorted names of the built-in definitions of one kind."""
    return sorted(p.stem for p in builtin_dir(kind).glob("*.toml"))


def resolve_definition(name, kind, base, where, key):
    """Path of a definition given by built-in name or by path relative to ``base``."""
    text = str(name)
    if text.endswith(".toml") or "/" in text or os.sep in text:
        path = Path(text)
        return path if path.is_absolute() else Path(base) / path
    candidate = builtin_dir(kind) / f"{text}.toml"
    if candidate.is_file():
        return candidate
    names = builtin_names(kind)
    label = {"features": "feature set"}.get(kind, kind[:-1])
    raise DefinitionError(problem(where, f'no built-in {label} named "{text}"{did_you_mean(text, names)}',
                                  f"use one of: {', '.join(names)}, or a path ending in .toml", key=key))

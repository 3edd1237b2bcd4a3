"""Reading one TOML table: typed getters that refuse a wrong value in one line.

:class:`_Section` wraps a table with its file and key path; every getter checks type,
range and choices and fails through :func:`heschl.errors.problem`. The small formatting
helpers show values in messages the same way everywhere.
"""
from __future__ import annotations

import math

from ..errors import DefinitionError, did_you_mean, problem

_REQUIRED = object()


class _Section:
    """One TOML table being read: typed getters, unknown keys refused with did-you-mean."""

    def __init__(self, data, where, path, known):
        self.data, self.where, self.path = data, where, path
        if not isinstance(data, dict):
            self.fail(None, f"expected a table, got {_show(data)}", "write it as a [table]")
        for key in data:
            if key not in known:
                self.fail(key, f'unknown key "{key}"{did_you_mean(key, known)}',
                          f"use one of: {', '.join(sorted(known))}")

    def key(self, key):
        return ".".join(p for p in (self.path, key) if p)

    def fail(self, key, what, fix):
        raise DefinitionError(problem(self.where, what, fix, key=self.key(key) if key else self.path))

    def raw(self, key, default=_REQUIRED):
        if key in self.data:
            return self.data[key]
        if default is _REQUIRED:
            self.fail(key, "missing required key", f'add "{key} = ..." to the file')
        return default

    def string(self, key, default=_REQUIRED, choices=None):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f"expected a non-empty text, got {_show(value)}", 'write it in quotes, e.g. "name"')
        if choices is not None and value not in choices:
            self.fail(key, f'"{value}" is not a known choice{did_you_mean(value, choices)}',
                      f"use one of: {', '.join(choices)}")
        return value

    def number(self, key, default=_REQUIRED, unit="", low=None, high=None, strict_low=False, strict_high=False):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            self.fail(key, f"expected a number{_in(unit)}, got {_show(value)}", "write a plain number")
        _check_range(self, key, float(value), unit, low, high, strict_low, strict_high)
        return float(value)

    def integer(self, key, default=_REQUIRED, low=None):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if isinstance(value, bool) or not isinstance(value, int):
            self.fail(key, f"expected a whole number, got {_show(value)}", "write a whole number such as 30")
        if low is not None and value < low:
            self.fail(key, f"{value} is below the minimum {low}", f"use a whole number of at least {low}")
        return value

    def pair(self, key, default=_REQUIRED, unit="s", low=None, high=None):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if (not isinstance(value, list) or len(value) != 2
                or any(isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v)
                       for v in value)):
            self.fail(key, f"expected two finite numbers [start, stop]{_in(unit)}, got {_show(value)}",
                      "write it as [start, stop]")
        start, stop = float(value[0]), float(value[1])
        if not start < stop:
            self.fail(key, f"[{_num(start)}, {_num(stop)}] {unit} does not increase",
                      "put the smaller value first")
        for v in (start, stop):
            _check_range(self, key, v, unit, low, high, False)
        return (start, stop)

    def strings(self, key, default=_REQUIRED, allow_single=False):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if allow_single and isinstance(value, str):
            value = [value]
        if (not isinstance(value, list) or not value
                or not all(isinstance(v, str) and v.strip() for v in value)):
            self.fail(key, f"expected a list of texts, got {_show(value)}", 'write it as ["a", "b"]')
        if len(set(value)) != len(value):
            dup = sorted({v for v in value if value.count(v) > 1})
            self.fail(key, f"repeats {', '.join(dup)}", "list each name once")
        return tuple(value)

    def table(self, key, default=_REQUIRED):
        if key not in self.data and default is _REQUIRED:
            self.fail(key, "missing required table", f"add a [{self.key(key)}] table")
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if not isinstance(value, dict):
            self.fail(key, f"expected a table, got {_show(value)}", f"write it as [{self.key(key)}]")
        return value

    def sub(self, key, known, default=_REQUIRED):
        value = self.table(key, default)
        if value is None:
            return None
        return _Section(value, self.where, self.key(key), known)


def _check_range(section, key, value, unit, low, high, strict_low, strict_high=False):
    if low is not None and (value < low or (strict_low and value == low)):
        word = "above" if strict_low else "at least"
        section.fail(key, f"{_num(value)}{_sp(unit)} is out of range", f"use a value {word} {_num(low)}{_sp(unit)}")
    if high is not None and (value > high or (strict_high and value == high)):
        word = "below" if strict_high else "of at most"
        section.fail(key, f"{_num(value)}{_sp(unit)} is out of range", f"use a value {word} {_num(high)}{_sp(unit)}")


def _show(value):
    text = repr(value) if not isinstance(value, str) else f'"{value}"'
    return text if len(text) < 60 else text[:57] + "..."


def _num(value):
    return f"{value:g}"


def _sp(unit):
    return f" {unit}" if unit else ""


def _in(unit):
    return f" in {unit}" if unit else ""

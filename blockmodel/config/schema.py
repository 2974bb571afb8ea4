"""How a setting of the project file is declared: once, with its type (the dataclass
annotation), its default, its allowed values or bounds and a one-line description.  The
reader checks values against these declarations, the error messages quote them, and the
README's table of keys is made from them (:func:`settings_table`)."""

from __future__ import annotations

import dataclasses
import types
import typing
from dataclasses import MISSING
from typing import Any

__all__ = ["Rule", "describe", "setting", "settings_rows", "settings_table"]


@dataclasses.dataclass(frozen=True)
class Rule:
    """What a setting allows.

    Attributes
    ----------
    doc : str
        One line saying what the setting does.
    choices : tuple of str, optional
        The allowed values of a text setting.
    low, high : float or tuple of float, optional
        Bounds of a number, or of each number of a list (a tuple gives one bound per
        entry); ``None`` leaves that side open.
    strict_low : bool
        The lower bound itself is not allowed (``> low`` rather than ``>= low``).
    parts : tuple of str, optional
        Names of a list's entries, quoted in messages (e.g. azimuth, plunge, tilt).
    entry : str
        What the keys of a table of tables stand for, in the table of keys.
    keys_of : str
        For a table that takes the keys of another section (those given replacing its
        values), that section's name: the table of keys lists them there only.
    """

    doc: str
    choices: tuple[str, ...] | None = None
    low: float | tuple[float, ...] | None = None
    high: float | tuple[float, ...] | None = None
    strict_low: bool = False
    parts: tuple[str, ...] | None = None
    entry: str = "NAME"
    keys_of: str = ""

    def problem(self, value: Any) -> str | None:
        """Why ``value`` is not allowed, or None (a table's or list's entries each)."""
        if isinstance(value, dict):
            return next((p for v in value.values() if (p := self.problem(v))), None)
        if self.choices is not None and isinstance(value, tuple):
            return next((p for v in value if (p := self.problem(v))), None)
        if self.choices is not None:
            if value not in self.choices:
                return f"must be one of {', '.join(self.choices)}; got {value!r}"
            return None
        if (self.low is None and self.high is None) or value is None:
            return None
        values = list(value) if isinstance(value, tuple) else [value]
        for n, v in enumerate(values):
            if isinstance(v, str) or v is None:
                continue
            lo = self.low[n] if isinstance(self.low, tuple) else self.low
            hi = self.high[n] if isinstance(self.high, tuple) else self.high
            below = lo is not None and (v <= lo if self.strict_low else v < lo)
            above = hi is not None and v > hi
            if below or above:
                return f"{self.allowed()}; got {list(value) if isinstance(value, tuple) else value}"
        return None

    def allowed(self) -> str:
        """The rule in words, e.g. ``must be positive`` or ``must lie in [0, 1]``."""
        if self.choices is not None:
            return f"must be one of {', '.join(self.choices)}"
        if isinstance(self.low, tuple) or isinstance(self.high, tuple):
            n = len(self.low if isinstance(self.low, tuple) else self.high)
            lows = self.low if isinstance(self.low, tuple) else (self.low,) * n
            highs = self.high if isinstance(self.high, tuple) else (self.high,) * n
            spans = [
                _interval(lo, hi, strict_low=self.strict_low)
                for lo, hi in zip(lows, highs, strict=True)
            ]
            if self.parts:
                pairs = [f"{name} in {span}" for name, span in zip(self.parts, spans, strict=True)]
                return "must be [" + ", ".join(self.parts) + "] with " + ", ".join(pairs)
            return "must have entries in " + ", ".join(spans)
        if self.high is None:
            if self.low == 0:
                return "must be positive" if self.strict_low else "must be zero or more"
            return f"must be {'more than' if self.strict_low else 'at least'} {_number(self.low)}"
        return f"must lie in {_interval(self.low, self.high, strict_low=self.strict_low)}"

    def summary(self) -> str:
        """The rule in a few words for a table (``positive``, ``in [0, 1]``), or ``""``."""
        if self.choices is None and self.low is None and self.high is None:
            return ""
        words = self.allowed()
        for prefix in ("must be ", "must lie ", "must have entries "):
            words = words.removeprefix(prefix)
        return words


def _number(v: float) -> str:
    return f"{v:g}"


def _interval(lo, hi, *, strict_low: bool) -> str:
    left = "(" if strict_low or lo is None else "["
    return f"{left}{'-inf' if lo is None else _number(lo)}, {'inf' if hi is None else _number(hi)}]"


def setting(
    default: Any = MISSING,
    *,
    doc: str,
    choices: tuple[str, ...] | None = None,
    low: float | tuple[float, ...] | None = None,
    high: float | tuple[float, ...] | None = None,
    strict_low: bool = False,
    parts: tuple[str, ...] | None = None,
    entry: str = "NAME",
    keys_of: str = "",
    factory: Any = MISSING,
) -> Any:
    """A dataclass field declaring one setting (see :class:`Rule`)."""
    rule = Rule(doc, choices, low, high, strict_low, parts, entry, keys_of)
    return dataclasses.field(default=default, default_factory=factory, metadata={"rule": rule})


def describe(field: dataclasses.Field) -> Rule | None:
    """The :class:`Rule` of a dataclass field declared with :func:`setting`."""
    return field.metadata.get("rule")


def _type_name(tp) -> str:
    origin, args = typing.get_origin(tp), typing.get_args(tp)
    if origin in (typing.Union, types.UnionType):
        inner = [a for a in args if a is not type(None)]
        return _type_name(inner[0]) + " (optional)"
    if origin is tuple:
        if len(args) == 2 and args[1] is Ellipsis:
            return f"list of {_type_name(args[0])}"
        return "[" + ", ".join(_type_name(a) for a in args) + "]"
    if origin is dict:
        return f"table of {_type_name(args[1])}"
    if dataclasses.is_dataclass(tp):
        return "table"
    return {float: "number", int: "whole number", str: "text", bool: "true/false"}.get(
        tp, getattr(tp, "__name__", str(tp))
    ).replace("Path", "file path")


def _default(field: dataclasses.Field) -> str:
    if field.default is not MISSING:
        value = field.default
    elif field.default_factory is not MISSING:
        value = field.default_factory()
    else:
        return "required"
    if dataclasses.is_dataclass(value) or (
        isinstance(value, tuple) and value and dataclasses.is_dataclass(value[0])
    ):
        return "see below"
    if value is None or value == "" or value == () or value == {}:
        return "none"
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, tuple):
        return "[" + ", ".join(_number(v) if isinstance(v, float) else str(v) for v in value) + "]"
    return _number(value) if isinstance(value, float) else str(value)


def settings_rows(cls, prefix: str = "") -> list[tuple[str, str, str, str, str]]:
    """(key, type, default, allowed, description) for every declared setting of ``cls``
    and of the tables nested in it, in declaration order."""
    hints = typing.get_type_hints(cls)
    rows = []
    for f in dataclasses.fields(cls):
        rule = describe(f)
        if rule is None:
            continue
        key = f"{prefix}{f.name}"
        tp = hints[f.name]
        nested = _nested(tp)
        if rule.keys_of:
            rows.append((key, _type_name(tp), "none", f"keys of [{rule.keys_of}]", rule.doc))
            continue
        if nested is not None:
            rows.append((key, _type_name(tp), "", "", rule.doc))
            origin = typing.get_origin(tp)
            inner = (
                f"{key}[]."
                if origin is tuple
                else f"{key}.{rule.entry}."
                if origin is dict
                else f"{key}."
            )
            rows += settings_rows(nested, inner)
            continue
        rows.append((key, _type_name(tp), _default(f), rule.summary(), rule.doc))
    return rows


def _nested(tp):
    """The dataclass held by a setting (directly, optionally, or as a list), if any."""
    origin, args = typing.get_origin(tp), typing.get_args(tp)
    if dataclasses.is_dataclass(tp):
        return tp
    if origin in (typing.Union, types.UnionType):
        return next((_nested(a) for a in args if _nested(a) is not None), None)
    if (
        origin is tuple
        and len(args) == 2
        and args[1] is Ellipsis
        and dataclasses.is_dataclass(args[0])
    ):
        return args[0]
    if origin is dict and dataclasses.is_dataclass(args[1]):
        return args[1]
    return None


def settings_table(cls) -> str:
    """The settings of ``cls`` as a Markdown table (the README's table of keys)."""
    lines = ["| key | type | default | allowed | what it does |", "|---|---|---|---|---|"]
    for key, tp, default, allowed, doc in settings_rows(cls):
        cells = [
            f"`{key}`",
            tp,
            f"`{default}`" if default not in ("", "required", "none", "see below") else default,
            allowed,
            doc,
        ]
        lines.append("| " + " | ".join(c.replace("|", "\\|") for c in cells) + " |")
    return "\n".join(lines)


START, END = "<!-- table of keys: start -->", "<!-- table of keys: end -->"


def with_table(text: str) -> str:
    """``text`` (the README) with the table of keys between its markers made anew."""
    from blockmodel.config.project import Project

    head, _, rest = text.partition(START)
    _, _, tail = rest.partition(END)
    return f"{head}{START}\n{settings_table(Project)}\n{END}{tail}"


if __name__ == "__main__":  # python3 -m blockmodel.config.schema README.md
    import sys
    from pathlib import Path

    readme = Path(sys.argv[1])
    readme.write_text(with_table(readme.read_text(encoding="utf-8")), encoding="utf-8")

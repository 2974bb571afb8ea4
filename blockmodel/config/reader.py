"""Reading a project file's TOML tables into the section dataclasses: every key known,
every value of the declared type and within its declared rule, or one clear error naming
the key (with the closest valid key for a misspelt one)."""

from __future__ import annotations

import dataclasses
import difflib
import math
import types
import typing
from pathlib import Path

from blockmodel.config.schema import describe
from blockmodel.errors import InputError, Problem

__all__ = ["Reader"]


class Reader:
    """Builds dataclasses from TOML tables, failing on the first bad key."""

    def __init__(self, path: Path):
        self.path = path
        self.base = path.parent

    def fail(self, key: str, message: str) -> typing.NoReturn:
        """Stop with one problem naming ``key`` in the project file."""
        raise InputError([Problem(str(self.path), None, None, key, message)])

    def build(self, cls, data, key: str):
        """An instance of dataclass ``cls`` from the TOML table ``data`` found at ``key``."""
        if not isinstance(data, dict):
            self.fail(key, f"'{key}' must be a table")
        hints = typing.get_type_hints(cls)
        names = [f.name for f in dataclasses.fields(cls) if f.name not in ("source",)]
        for k in data:
            if k not in names:
                close = difflib.get_close_matches(k, names, n=1, cutoff=0.5)
                hint = (
                    f"; did you mean '{close[0]}'?"
                    if close
                    else f"; valid keys: {', '.join(names)}"
                )
                where = f"section [{key}]" if key else "the top level"
                self.fail(f"{key}.{k}".strip("."), f"unknown key '{k}' in {where}{hint}")
        kwargs = {}
        for f in dataclasses.fields(cls):
            if f.name not in data:
                if f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING:
                    if f.name == "source":
                        continue
                    self.fail(f"{key}.{f.name}".strip("."), f"missing required key '{f.name}'")
                continue
            sub = f"{key}.{f.name}".strip(".")
            kwargs[f.name] = self.convert(hints[f.name], data[f.name], sub)
            rule = describe(f)
            value = kwargs[f.name]
            if isinstance(value, dict):  # each entry of a table, by its key
                entries = [(f"{sub}.{k}", v) for k, v in value.items()]
            elif isinstance(value, tuple) and rule is not None and rule.choices:
                entries = [(f"{sub}[{i}]", v) for i, v in enumerate(value)]
            else:
                entries = [(sub, value)]
            for where, v in entries:
                problem = rule.problem(v) if rule is not None else None
                if problem:
                    self.fail(where, f"'{where}' {problem}")
        return cls(**kwargs)

    def convert(self, tp, value, key: str):
        """``value`` as type ``tp`` (numbers finite, paths resolved), or a problem naming ``key``."""
        origin = typing.get_origin(tp)
        args = typing.get_args(tp)
        if origin in (typing.Union, types.UnionType):
            inner = next(a for a in args if a is not type(None))
            return self.convert(inner, value, key)
        if dataclasses.is_dataclass(tp):
            return self.build(tp, value, key)
        if tp is Path:
            if not isinstance(value, str):
                self.fail(key, f"'{key}' must be a file path (text)")
            return (self.base / value).resolve()
        if tp is bool:
            if not isinstance(value, bool):
                self.fail(key, f"'{key}' must be true or false; got {value!r}")
            return value
        if tp is float:
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                self.fail(key, f"'{key}' must be a number; got {value!r}")
            if not math.isfinite(value) or abs(value) > 1e12:
                self.fail(key, f"'{key}' must be a finite number of sensible size; got {value!r}")
            return float(value)
        if tp is int:
            if isinstance(value, bool) or not isinstance(value, int):
                self.fail(key, f"'{key}' must be a whole number; got {value!r}")
            return value
        if tp is str:
            if not isinstance(value, str):
                self.fail(key, f"'{key}' must be text; got {value!r}")
            return value
        if origin is tuple:
            if not isinstance(value, list):
                self.fail(key, f"'{key}' must be a list; got {value!r}")
            if len(args) == 2 and args[1] is Ellipsis:
                return tuple(self.convert(args[0], v, f"{key}[{i}]") for i, v in enumerate(value))
            if len(value) != len(args):
                self.fail(key, f"'{key}' must have {len(args)} entries; got {len(value)}")
            return tuple(
                self.convert(a, v, f"{key}[{i}]")
                for i, (a, v) in enumerate(zip(args, value, strict=True))
            )
        if origin is dict:
            if not isinstance(value, dict):
                self.fail(key, f"'{key}' must be a table")
            return {k: self.convert(args[1], v, f"{key}.{k}") for k, v in value.items()}
        raise TypeError(f"unsupported type {tp} for {key}")  # pragma: no cover - schema bug

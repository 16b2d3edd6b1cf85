"""The table walker: reads one TOML table with type checks, line-numbered errors and
spelling suggestions, and rejects keys nobody asked for."""

from __future__ import annotations

import dataclasses
import difflib
from collections.abc import Iterable, Mapping
from typing import Any

from evtkin.config.keylines import KeyLines, Path_
from evtkin.errors import ConfigError
from evtkin.expr import Expression, ExpressionError, parse

_REQUIRED = object()


def _fmt_path(path: Path_) -> str:
    out = ""
    for p in path:
        if isinstance(p, int):
            out += f"[{p}]"
        else:
            out += ("." if out else "") + str(p)
    return out or "(top level)"


class _Ctx:
    def __init__(self, source: str, lines: KeyLines | None) -> None:
        self.source = source
        self.lines = lines

    def error(self, path: Path_, message: str, *, suggest: str | None = None) -> ConfigError:
        line = self.lines.line(path) if self.lines is not None else None
        where = f"{self.source}:{line}" if line is not None else self.source
        hint = f"; did you mean {suggest!r}?" if suggest else ""
        return ConfigError(f"{where}: {_fmt_path(path)}: {message}{hint}")

    def expr(self, path: Path_, text: Any) -> Expression:
        if not isinstance(text, str):
            raise self.error(path, f"expected an expression in quotes, got {_kind(text)}")
        try:
            parsed = parse(text)
        except ExpressionError as exc:
            raise self._expr_error(path, exc) from None
        line = self.lines.line(path) if self.lines is not None else None
        at = f"{self.source}:{line}" if line is not None else self.source
        return dataclasses.replace(parsed, where=f"{at}: {_fmt_path(path)}")

    def _expr_error(self, path: Path_, exc: ExpressionError) -> ConfigError:
        line = self.lines.line(path) if self.lines is not None else None
        where = f"{self.source}:{line}" if line is not None else self.source
        return ConfigError(exc.render(f"{where}: {_fmt_path(path)}: bad expression: "))


def _kind(value: Any) -> str:
    if isinstance(value, bool):
        return f"a boolean ({str(value).lower()})"
    if isinstance(value, (int, float)):
        return f"a number ({value})"
    if isinstance(value, str):
        return f"a string ({value!r})"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "a table"
    return type(value).__name__


def _suggest_key(key: str, present: Iterable[str]) -> str | None:
    """A key in ``present`` that looks like a misspelling of the required ``key``."""
    close = difflib.get_close_matches(key, list(present), n=1, cutoff=0.75)
    return close[0] if close else None


def _suggest(word: str, choices: Iterable[str]) -> str | None:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return close[0] if close else None


class _Table:
    """Reads one TOML table, checking types; :meth:`done` rejects keys nobody asked for."""

    def __init__(self, ctx: _Ctx, path: Path_, data: Any) -> None:
        if not isinstance(data, dict):
            raise ctx.error(path, f"expected a table, got {_kind(data)}")
        self.ctx, self.path, self.data = ctx, path, data
        self.known: list[str] = []

    def has(self, key: str) -> bool:
        return key in self.data

    def raw(self, key: str, default: Any = None) -> Any:
        self.known.append(key)
        return self.data.get(key, default)

    def _get(self, key: str, default: Any) -> Any:
        self.known.append(key)
        if key not in self.data:
            if default is _REQUIRED:
                self._missing(key)
            return default
        return self.data[key]

    def _missing(self, key: str, what: str = "") -> None:
        """Raise for a missing required key; a misspelt spelling of it is named instead."""
        typo = _suggest_key(key, [k for k in self.data if k != key])
        if typo is not None:
            raise self.ctx.error((*self.path, typo), f"unknown key {typo!r}", suggest=key)
        raise self.ctx.error((*self.path, key), f"this key is required{what}")

    def string(self, key: str, default: Any = _REQUIRED, choices: Iterable[str] = ()) -> Any:
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if not isinstance(v, str):
            raise self.ctx.error((*self.path, key), f"expected a string, got {_kind(v)}")
        allowed = tuple(choices)
        if allowed and v not in allowed:
            raise self.ctx.error(
                (*self.path, key),
                f"expected one of {', '.join(map(repr, allowed))}, got {v!r}",
                suggest=_suggest(v, allowed),
            )
        return v

    def number(self, key: str, default: Any = _REQUIRED, *, positive: bool = False,
               nonnegative: bool = False) -> Any:
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise self.ctx.error((*self.path, key), f"expected a number, got {_kind(v)}")
        if v != v or v in (float("inf"), float("-inf")):
            raise self.ctx.error((*self.path, key), f"expected a finite number, got {v}")
        if positive and v <= 0:
            raise self.ctx.error((*self.path, key), f"expected a number > 0, got {v}")
        if nonnegative and v < 0:
            raise self.ctx.error((*self.path, key), f"expected a number >= 0, got {v}")
        return float(v)

    def integer(self, key: str, default: Any = _REQUIRED, *, positive: bool = False) -> Any:
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if isinstance(v, bool) or not isinstance(v, int):
            raise self.ctx.error((*self.path, key), f"expected a whole number, got {_kind(v)}")
        if positive and v <= 0:
            raise self.ctx.error((*self.path, key), f"expected a whole number > 0, got {v}")
        return v

    def boolean(self, key: str, default: Any = _REQUIRED) -> Any:
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if not isinstance(v, bool):
            raise self.ctx.error((*self.path, key), f"expected true or false, got {_kind(v)}")
        return v

    def strings(self, key: str, default: Any = _REQUIRED) -> Any:
        """A string or a list of strings → tuple of strings."""
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if isinstance(v, str):
            return (v,)
        if not isinstance(v, list) or not all(isinstance(x, str) for x in v):
            raise self.ctx.error(
                (*self.path, key), f"expected a string or a list of strings, got {_kind(v)}"
            )
        return tuple(v)

    def expression(self, key: str) -> Expression:
        self.known.append(key)
        if key not in self.data:
            self._missing(key, " (an expression)")
        return self.ctx.expr((*self.path, key), self.data[key])

    def table(self, key: str, required: bool = False) -> _Table | None:
        self.known.append(key)
        if key not in self.data:
            if required:
                raise self.ctx.error((*self.path, key), "this table is required")
            return None
        return _Table(self.ctx, (*self.path, key), self.data[key])

    def done(self) -> None:
        for key in self.data:
            if key not in self.known:
                raise self.ctx.error(
                    (*self.path, key),
                    f"unknown key {key!r} (known here: {', '.join(sorted(set(self.known)))})",
                    suggest=_suggest(key, self.known),
                )


def _particle_ids(t: _Table, key: str, classes: Mapping[str, tuple[int, ...]],
                  default: Any = _REQUIRED) -> tuple[tuple[int, ...], tuple[str, ...]]:
    v = t.raw(key, default)
    if v is _REQUIRED:
        t._missing(key, " (particle classes or PDG ids)")
    items = v if isinstance(v, list) else [v]
    ids: list[int] = []
    names: list[str] = []
    for i, item in enumerate(items):
        sub = t.path + (key,) + ((i,) if isinstance(v, list) else ())
        if isinstance(item, bool):
            raise t.ctx.error(sub, f"expected a class name or a PDG id, got {_kind(item)}")
        if isinstance(item, int):
            if item == 0:
                raise t.ctx.error(sub, "0 is not a PDG id")
            ids.append(abs(item))
            names.append(str(abs(item)))
        elif isinstance(item, str):
            if item not in classes:
                raise t.ctx.error(
                    sub, f"unknown particle class {item!r} (known: {', '.join(sorted(classes))})",
                    suggest=_suggest(item, classes),
                )
            ids.extend(classes[item])
            names.append(item)
        else:
            raise t.ctx.error(sub, f"expected a class name or a PDG id, got {_kind(item)}")
    if not ids:
        raise t.ctx.error((*t.path, key), "expected at least one particle class or PDG id")
    return tuple(dict.fromkeys(ids)), tuple(names)


def _int_list(t: _Table, key: str) -> tuple[int, ...]:
    v = t.raw(key, [])
    items = v if isinstance(v, list) else [v]
    out: list[int] = []
    for i, item in enumerate(items):
        if isinstance(item, bool) or not isinstance(item, int):
            sub = t.path + (key,) + ((i,) if isinstance(v, list) else ())
            raise t.ctx.error(sub, f"expected a PDG id (whole number), got {_kind(item)}")
        out.append(abs(item))
    return tuple(out)


def _pair(t: _Table, key: str) -> tuple[float, float] | None:
    v = t.raw(key)
    if v is None:
        return None
    ok = (isinstance(v, list) and len(v) == 2
          and all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in v))
    if not ok:
        raise t.ctx.error((*t.path, key), f"expected [low, high] (two numbers), got {_kind(v)}")
    lo, hi = float(v[0]), float(v[1])
    if not lo < hi:
        raise t.ctx.error((*t.path, key), f"expected low < high, got [{v[0]}, {v[1]}]")
    return lo, hi


def _check_name(ctx: _Ctx, path: Path_, name: str, known: Iterable[str], what: str) -> None:
    known = list(known)
    if name not in known:
        raise ctx.error(path, f"{name!r} is not a defined {what} (defined: {', '.join(known)})",
                        suggest=_suggest(name, known))

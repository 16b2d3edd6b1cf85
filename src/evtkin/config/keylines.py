"""The TOML line scanner: key paths → the 1-based lines where they are written."""

from __future__ import annotations

import contextlib
from collections.abc import Iterable

Path_ = tuple[str | int, ...]


class KeyLines:
    """Map TOML key paths to the 1-based line where each key (or array element) is written.

    Handles table headers, arrays of tables, dotted and quoted keys, inline tables, multi-line
    arrays and all four string forms. Paths use ints for array indices, e.g.
    ``("step", 2, "require")``. :meth:`line` falls back to the nearest written ancestor.
    """

    def __init__(self, text: str) -> None:
        self.text = text
        self.lines: dict[Path_, int] = {}
        self._i = 0
        self._line = 1
        self._aot: dict[Path_, int] = {}
        # the text was already accepted by the TOML parser; be lenient on odd corners
        with contextlib.suppress(IndexError):
            self._scan()

    def line(self, path: Iterable[str | int]) -> int | None:
        p = tuple(path)
        while p:
            if p in self.lines:
                return self.lines[p]
            p = p[:-1]
        return None

    # scanning helpers ------------------------------------------------------
    def _peek(self, k: int = 0) -> str:
        j = self._i + k
        return self.text[j] if j < len(self.text) else ""

    def _advance(self, k: int = 1) -> None:
        for _ in range(k):
            if self._i < len(self.text) and self.text[self._i] == "\n":
                self._line += 1
            self._i += 1

    def _skip_ws(self, newlines: bool) -> None:
        while self._i < len(self.text):
            c = self.text[self._i]
            if c in " \t\r" or (newlines and c == "\n"):
                self._advance()
            elif c == "#":
                while self._i < len(self.text) and self.text[self._i] != "\n":
                    self._advance()
            else:
                return

    def _string(self) -> str:
        q = self._peek()
        if self.text.startswith(q * 3, self._i):
            self._advance(3)
            end = self.text.find(q * 3, self._i)
            end = len(self.text) if end < 0 else end
            while self._i < end:
                self._advance()
            self._advance(3)
            while self._peek() == q:  # up to two extra quotes belong to the string
                self._advance()
            return ""
        self._advance()
        out = []
        while self._i < len(self.text) and self._peek() != q and self._peek() != "\n":
            if q == '"' and self._peek() == "\\":
                self._advance()
            out.append(self._peek())
            self._advance()
        self._advance()
        return "".join(out)

    def _key(self, stop: str) -> list[str]:
        parts: list[str] = []
        while True:
            self._skip_ws(False)
            c = self._peek()
            if c in ('"', "'"):
                parts.append(self._string())
            else:
                start = self._i
                while self._peek() and self._peek() not in " \t.=]\n" + stop:
                    self._advance()
                parts.append(self.text[start:self._i])
            self._skip_ws(False)
            if self._peek() == ".":
                self._advance()
                continue
            return parts

    def _value(self, path: Path_) -> None:
        self._skip_ws(False)
        c = self._peek()
        if c in ('"', "'"):
            self._string()
        elif c == "[":
            self._advance()
            index = 0
            while True:
                self._skip_ws(True)
                if self._peek() in ("]", ""):
                    self._advance()
                    return
                self.lines.setdefault((*path, index), self._line)
                self._value((*path, index))
                index += 1
                self._skip_ws(True)
                if self._peek() == ",":
                    self._advance()
        elif c == "{":
            self._advance()
            while True:
                self._skip_ws(False)
                if self._peek() in ("}", ""):
                    self._advance()
                    return
                if self._peek() == ",":
                    self._advance()
                    continue
                full = path + tuple(self._key("}"))
                self.lines.setdefault(full, self._line)
                if self._peek() == "=":
                    self._advance()
                self._value(full)
        else:
            while self._peek() and self._peek() not in ",]}\n#":
                self._advance()

    def _resolve(self, parts: list[str]) -> Path_:
        out: Path_ = ()
        for part in parts:
            out = (*out, part)
            if out in self._aot:
                out = (*out, self._aot[out])
        return out

    def _scan(self) -> None:
        table: Path_ = ()
        while True:
            self._skip_ws(True)
            if self._i >= len(self.text):
                return
            if self.text.startswith("[[", self._i):
                line = self._line
                self._advance(2)
                parts = self._key("]")
                self._advance(2)
                base = (*self._resolve(parts[:-1]), parts[-1])
                index = self._aot.get(base, -1) + 1
                self._aot[base] = index
                table = (*base, index)
                self.lines.setdefault(base, line)
                self.lines[table] = line
            elif self._peek() == "[":
                line = self._line
                self._advance()
                parts = self._key("]")
                self._advance()
                table = self._resolve(parts)
                self.lines.setdefault(table, line)
            else:
                line = self._line
                full = table + tuple(self._key("="))
                for k in range(len(table) + 1, len(full) + 1):
                    self.lines.setdefault(full[:k], line)
                if self._peek() == "=":
                    self._advance()
                self._value(full)

"""The one exception hierarchy of frontwatch; messages say what was wrong and where."""

from __future__ import annotations


class FrontwatchError(Exception):
    """Root of every error frontwatch raises on purpose."""


class ConfigError(FrontwatchError):
    """A network file or setting is wrong: the message names the file and the key."""


class DecodeError(FrontwatchError):
    """An observation could not be decoded: names the source (file/topic), line, field and station."""

    def __init__(
        self,
        reason: str,
        *,
        source: str | None = None,
        line: int | None = None,
        field: str | None = None,
        station: str | None = None,
        code: str = "invalid",
    ) -> None:
        self.reason = reason
        self.source = source
        self.line = line
        self.field = field
        self.station = station
        self.code = code  # short machine-readable reason, used as a counter label
        super().__init__(self._render())

    def _render(self) -> str:
        where = []
        if self.source:
            where.append(str(self.source))
        if self.line is not None:
            where.append(f"line {self.line}")
        if self.station:
            where.append(f"station {self.station}")
        if self.field:
            where.append(f"field {self.field!r}")
        prefix = ", ".join(where)
        return f"{prefix}: {self.reason}" if prefix else self.reason

    def at(self, *, source: str | None = None, line: int | None = None) -> DecodeError:
        """The same error with its location filled in (decoders raise it before they know the line)."""
        return DecodeError(
            self.reason,
            source=source if source is not None else self.source,
            line=line if line is not None else self.line,
            field=self.field,
            station=self.station,
            code=self.code,
        )


class InputFileError(FrontwatchError):
    """A whole input file is unusable (missing, unreadable, no time column ...)."""


class StateError(FrontwatchError):
    """A snapshot could not be restored (wrong version or shape)."""

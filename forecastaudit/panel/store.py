"""Where a panel's results go as series finish: a JSON Lines file that a later run resumes.

The store is one UTF-8 text file, ``panel-store.jsonl`` in the output folder, one JSON
object per line:

* line 1, the header: ``{"store": "forecastaudit-panel", "version": 1, "settings": {...},
  "settings_digest": "<sha256>"}``. The settings are the audit options every series shares
  (estimators, tolerances, production estimator, horizon, levels, holdout, forecastaudit's
  version); a run with other settings refuses the store rather than mix two audits.
* one line per series outcome: ``{"id", "digest", "status", "row", "causes", "record",
  "error", "seconds", "files", "sketch"}``. ``status`` is ``"audited"`` (``row`` is its summary row,
  ``causes`` the findings the panel counts, ``record`` the full sealed audit record;
  a failing series also has ``sketch``, the end of its series and its forecasts for the
  report),
  ``"input-error"`` (the series itself cannot be audited: ``error`` says why), or
  ``"failed"``, ``"timed-out"``, ``"crashed"`` (the run of that series did not finish).

Each line is written whole and flushed to disk before the next series is taken, so an
interrupted run loses at most the series that were running. A last line cut short by the
interruption is dropped when the store is opened again. A later line for the same id
supersedes an earlier one.

Resuming skips a series whose latest line is ``"audited"`` or ``"input-error"`` with the
same digest (the same values, dates and model); a series that failed, timed out or crashed
is tried again, as is a series whose data changed.
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from forecastaudit.errors import PanelError
from forecastaudit.jsonutil import to_plain

__all__ = ["FINISHED", "STORE_NAME", "MemoryStore", "PanelStore", "settings_digest"]

STORE_NAME = "panel-store.jsonl"
STORE_KIND = "forecastaudit-panel"
STORE_VERSION = 1

#: Statuses of a series that a resumed run does not audit again.
FINISHED = frozenset({"audited", "input-error"})

#: What the store keeps in memory of each series (the record stays on disk).
_LIGHT = ("id", "digest", "status", "row", "causes", "error", "seconds", "files", "sketch")


def settings_digest(settings: dict[str, Any]) -> str:
    """SHA-256 of the settings in canonical JSON."""
    text = json.dumps(to_plain(settings), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _line(entry: dict[str, Any]) -> str:
    return json.dumps(to_plain(entry), separators=(",", ":"), allow_nan=False) + "\n"


class MemoryStore:
    """A store kept in memory, for a panel audited without an output folder."""

    path: Path | None = None

    def __init__(self, settings: dict[str, Any]) -> None:
        self.settings = settings
        self._light: dict[str, dict[str, Any]] = {}
        self._records: dict[str, dict[str, Any] | None] = {}
        self.resumed = 0

    def finished(self) -> dict[str, str]:
        """Id -> digest of the series that need no second audit."""
        return {k: v["digest"] for k, v in self._light.items() if v["status"] in FINISHED}

    def append(self, entry: dict[str, Any]) -> None:
        """Keep one series' outcome."""
        plain = to_plain(entry)
        self._light[plain["id"]] = {k: plain.get(k) for k in _LIGHT}
        self._records[plain["id"]] = plain.get("record")

    def entries(self) -> Iterator[dict[str, Any]]:
        """The latest outcome of every series, without records, in first-seen order."""
        yield from self._light.values()

    def record(self, series_id: str) -> dict[str, Any] | None:
        """The audit record of one series (None when it was not audited)."""
        if series_id not in self._light:
            raise PanelError(f"The panel has no series {series_id!r}.")
        return self._records.get(series_id)

    def close(self) -> None:
        """Nothing to release."""


class PanelStore(MemoryStore):
    """The JSON Lines store of a panel in an output folder (see the module docstring).

    Parameters
    ----------
    folder : path
        The output folder; created if needed.
    settings : dict
        The shared audit settings (written in the header, compared on resume).
    fresh : bool
        Start a new store even if one is there (the old one is replaced at once,
        atomically). Default False: resume.

    Raises
    ------
    PanelError
        If the folder holds a store of another audit (other settings), or a file that is
        not a panel store, or cannot be written.
    """

    def __init__(self, folder: str | os.PathLike[str], settings: dict[str, Any], *,
                 fresh: bool = False) -> None:  # fmt: skip
        super().__init__(settings)
        self.folder = Path(folder)
        self.path = self.folder / STORE_NAME
        self._digest = settings_digest(settings)
        self._offsets: dict[str, int] = {}
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise PanelError(
                f"Cannot create the output folder {self.folder}: {exc.strerror or exc}; "
                "choose a folder you can write to."
            ) from None
        if self.path.exists() and not fresh:
            self._load()
        else:
            self._start()
        try:
            self._handle = open(self.path, "a", encoding="utf-8", newline="\n")
        except OSError as exc:
            raise PanelError(f"Cannot write {self.path}: {exc.strerror or exc}.") from None

    def _start(self) -> None:
        from forecastaudit.files import write_text_atomic

        header = {
            "store": STORE_KIND,
            "version": STORE_VERSION,
            "settings": self.settings,
            "settings_digest": self._digest,
        }
        try:
            write_text_atomic(self.path, _line(header))
        except OSError as exc:
            raise PanelError(f"Cannot write {self.path}: {exc.strerror or exc}.") from None

    def _load(self) -> None:
        raw = self.path.read_bytes()
        complete = raw.rfind(b"\n") + 1
        if complete < len(raw):
            # The last line was cut short by an interruption: drop it before appending.
            with open(self.path, "r+b") as handle:
                handle.truncate(complete)
            raw = raw[:complete]
        offset = 0
        for number, line in enumerate(raw.splitlines(keepends=True), start=1):
            start, offset = offset, offset + len(line)
            try:
                value = json.loads(line)
            except ValueError:
                raise PanelError(
                    f"{self.path} line {number} is not JSON: the file is not a panel store, "
                    "or it was edited. Move it away, or start afresh (fresh=True, --fresh)."
                ) from None
            if number == 1:
                self._check_header(value)
                continue
            if not isinstance(value, dict) or "id" not in value or "status" not in value:
                raise PanelError(f"{self.path} line {number} is not a series entry.")
            self._light[value["id"]] = {k: value.get(k) for k in _LIGHT}
            self._offsets[value["id"]] = start
        self.resumed = len(self.finished())

    def _check_header(self, header: Any) -> None:
        if not isinstance(header, dict) or header.get("store") != STORE_KIND:
            raise PanelError(
                f"{self.path} is not a forecastaudit panel store; choose another output folder."
            )
        if header.get("version") != STORE_VERSION:
            raise PanelError(
                f"{self.path} is a panel store of version {header.get('version')!r}; this "
                f"forecastaudit reads version {STORE_VERSION}. Start afresh (--fresh) or use "
                "the forecastaudit that wrote it."
            )
        if header.get("settings_digest") != self._digest:
            old = header.get("settings") or {}
            new = to_plain(self.settings)
            changed = sorted(k for k in set(old) | set(new) if old.get(k) != new.get(k))
            raise PanelError(
                f"{self.path} holds a panel audited with other settings (changed: "
                f"{', '.join(changed) or 'unknown'}); resuming would mix two audits. Use "
                "another output folder, or start afresh (fresh=True, --fresh)."
            )

    def append(self, entry: dict[str, Any]) -> None:
        """Write one series' outcome as a line, flushed to disk."""
        plain = to_plain(entry)
        text = json.dumps(plain, separators=(",", ":"), allow_nan=False) + "\n"
        position = self._handle.tell()
        self._handle.write(text)
        self._handle.flush()
        os.fsync(self._handle.fileno())
        self._light[plain["id"]] = {k: plain.get(k) for k in _LIGHT}
        self._offsets[plain["id"]] = position

    def record(self, series_id: str) -> dict[str, Any] | None:
        """The audit record of one series, read from the store (None when not audited)."""
        if series_id not in self._offsets:
            raise PanelError(f"The panel has no series {series_id!r}.")
        self._handle.flush()
        with open(self.path, encoding="utf-8") as handle:
            handle.seek(self._offsets[series_id])
            return json.loads(handle.readline()).get("record")

    def close(self) -> None:
        """Close the file."""
        if not self._handle.closed:
            self._handle.close()


def read_store(folder: str | os.PathLike[str]) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """The settings and the latest entry of every series (without records) of a store.

    Raises
    ------
    PanelError
        If there is no store in ``folder`` or it cannot be read.
    """
    path = Path(folder)
    if path.is_dir():
        path = path / STORE_NAME
    if not path.is_file():
        raise PanelError(f"No panel store at {path}; give the output folder of a panel audit.")
    entries: dict[str, dict[str, Any]] = {}
    settings: dict[str, Any] = {}
    with open(path, encoding="utf-8") as handle:
        for number, line in enumerate(handle, start=1):
            if not line.endswith("\n"):
                break  # cut short by an interruption
            try:
                value = json.loads(line)
            except ValueError:
                raise PanelError(f"{path} line {number} is not JSON.") from None
            if number == 1:
                if not isinstance(value, dict) or value.get("store") != STORE_KIND:
                    raise PanelError(f"{path} is not a forecastaudit panel store.")
                settings = value.get("settings") or {}
                continue
            entries[value["id"]] = {k: value.get(k) for k in _LIGHT}
    return settings, list(entries.values())

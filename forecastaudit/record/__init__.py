"""The audit record: a versioned, schema-validated JSON document, and changes between two.

``RecordDrift`` is the old name of :class:`RecordChanges`, kept for one release (it warns).

:mod:`.document` builds, seals, validates, writes and loads a record; :mod:`.changes`
compares two records.
"""

from forecastaudit.record.changes import RecordChanges, compare_records
from forecastaudit.record.document import (
    RECORD_KIND,
    SCHEMA_VERSION,
    build_record,
    content_digest,
    dumps,
    load_record,
    provenance,
    validate_record,
)

__all__ = [
    "RECORD_KIND",
    "SCHEMA_VERSION",
    "RecordChanges",
    "build_record",
    "compare_records",
    "content_digest",
    "dumps",
    "load_record",
    "provenance",
    "validate_record",
]


def __getattr__(name: str) -> object:
    if name == "RecordDrift":
        from forecastaudit.record import changes

        return changes.RecordDrift
    raise AttributeError(f"module 'forecastaudit.record' has no attribute {name!r}")

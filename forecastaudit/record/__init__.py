"""The audit record: a versioned, schema-validated JSON document, and changes between two.

:mod:`.document` builds, seals, validates, writes and loads a record; :mod:`.changes`
compares two records.
"""

from forecastaudit.record.changes import RecordDrift, compare_records
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
    "RecordDrift",
    "build_record",
    "compare_records",
    "content_digest",
    "dumps",
    "load_record",
    "provenance",
    "validate_record",
]

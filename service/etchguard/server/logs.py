"""Structured logs: one JSON object per line on stderr.

Every line has ``ts`` (UTC, ISO 8601, ms), ``level``, ``logger`` and ``msg``; a call
site adds its own keys with ``extra={"fields": {...}}``. The grpc library's own
Python log records go through the same handler, so a farm's log shipper sees one
format.
"""

from __future__ import annotations

import json
import logging
import sys
from datetime import UTC, datetime


class JsonFormatter(logging.Formatter):
    def format(self, record: logging.LogRecord) -> str:
        entry = {
            "ts": datetime.fromtimestamp(record.created, UTC).isoformat(timespec="milliseconds"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "msg": record.getMessage(),
        }
        fields = getattr(record, "fields", None)
        if fields:
            entry.update(fields)
        if record.exc_info:
            entry["exc"] = self.formatException(record.exc_info)
        return json.dumps(entry, default=str)


def configure(level: str = "info", stream=None) -> None:
    """Send every log record, etchguard's and grpc's, to ``stream`` as JSON lines."""
    handler = logging.StreamHandler(stream or sys.stderr)
    handler.setFormatter(JsonFormatter())
    root = logging.getLogger()
    for old in list(root.handlers):
        root.removeHandler(old)
    root.addHandler(handler)
    root.setLevel(logging.WARNING)  # libraries: warnings and worse
    logging.getLogger("etchguard").setLevel(level.upper())

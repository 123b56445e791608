"""sweep.json and sweep.csv: the contract a spec sheet is fed from.

The JSON layout is documented in docs/sweep-json.md and by the JSON Schema
``docs/sweep.schema.json``.  Output is deterministic: the same
input and options give byte-identical files.
"""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

from .. import registry
from ..audio import write_text_atomic
from ..names import csv_cell

CSV_KEYS = (
    ("id", "response", "family", "order", "poles", "low_hz", "high_hz")
    + registry.keys(1, "csv")
    + ("passes", "fails")
    + registry.keys(2, "csv")
)


def dumps(doc: dict) -> str:
    """Serialise sweep.json text (2-space indent, no NaN, trailing newline)."""
    return json.dumps(doc, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def csv_text(doc: dict, keys=CSV_KEYS) -> str:
    """One row per case of ``doc["cases"]``, the ``keys`` columns; failing targets joined with ';',
    booleans as true/false, empty cells for null."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(keys)
    for case in doc["cases"]:
        row = []
        for key in keys:
            v = case.get(key)
            if key == "fails":
                v = ";".join(v)
            elif v is None:
                v = ""
            elif isinstance(v, bool):
                v = "true" if v else "false"
            row.append(csv_cell(v))
        writer.writerow(row)
    return buf.getvalue()


def write_outputs(doc: dict, out_dir, *, inputs=()) -> dict[str, Path]:
    """Write sweep.json and sweep.csv into ``out_dir`` atomically."""
    out = Path(out_dir)
    return {
        "json": write_text_atomic(out / "sweep.json", dumps(doc), inputs=inputs),
        "csv": write_text_atomic(out / "sweep.csv", csv_text(doc), inputs=inputs),
    }


def read_sweep(path) -> dict:
    """Read a sweep.json written by audiobw."""
    return json.loads(Path(path).read_text(encoding="utf-8"))

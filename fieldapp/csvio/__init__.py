"""CSV export and import of the log.

Export: RFC 4180 (comma, double quotes, CRLF), UTF-8 with a byte-order mark
so spreadsheets show µ correctly, one row per reading version, numbers in
plain decimal notation. Rows are streamed from the database, never collected.
Text cells that a spreadsheet would run as a formula are prefixed with an
apostrophe (OWASP CSV injection guidance); numeric columns stay numbers.

Import: a file made by export (the header must match); rows whose uuid is
already in the log are skipped, so logs from several tablets merge without
doubles. The whole file is checked first; its new rows are converted and
staged in short chunks and then land in one short final transaction: either
every new row lands or none does (see :func:`import_rows`).

The package, by step: ``columns`` (the one list of columns), ``cells`` (one
cell each way), ``writing`` (export), ``reading`` (an export file read and
every cell checked), ``plan`` (the file checked against itself and the log)
and ``importing`` (converted and staged in chunks, then landed).
"""
from __future__ import annotations

from .cells import (ReadableCells, _acks_cell, _parse_acks, neutralize, plain_number,
                    unneutralize)
from .columns import BOM, COLUMNS, EXPORT_COLUMNS, NUMERIC, OPTIONAL_COLUMNS, READABLE_COLUMNS
from .importing import IMPORT_CHUNK, import_csv, import_rows
from .reading import ImportError_, read_export
from .writing import _acks_or_none, export, export_lines

__all__ = ["BOM", "COLUMNS", "EXPORT_COLUMNS", "IMPORT_CHUNK", "NUMERIC", "OPTIONAL_COLUMNS",
           "READABLE_COLUMNS",
           "ImportError_", "ReadableCells", "export", "export_lines", "import_csv",
           "import_rows", "neutralize", "plain_number", "read_export",
           "unneutralize"]

"""The columns of the log's CSV export, in one place (the export writes them,
the import reads them back, the workbook and the tests name them)."""
from __future__ import annotations

BOM = "\ufeff"

COLUMNS = ("site", "taken_at", "sample", "depth_cm", "value", "unit", "temp_c", "compensated",
           "ratio", "sp_pct", "texture", "salt_type", "tds_factor", "theta_g_pct", "matric_MPa",
           "meter", "replicate_group", "note", "ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa",
           "psi_s_method", "flags", "status", "void_reason", "voided_at", "supersedes_uuid",
           "uuid", "visited_by", "recorded_at", "app_version", "flag_acks")
#: Machine columns an export made before they existed lacks; such a file
#: still imports, the column read as empty (salt_type: schema 016).
OPTIONAL_COLUMNS = frozenset(("salt_type",))
#: Columns for a person reading the file in a spreadsheet, after the machine
#: columns above (which import reads back; these it ignores): the ratio as a
#: number and as text no spreadsheet reads as a time, the local date-time a
#: spreadsheet reads as a date (the offset stays in taken_at), and plain words
#: beside the codes (fieldapp/labels.py).
READABLE_COLUMNS = ("ratio_water_parts", "ratio_text", "taken_local", "flag_labels",
                    "ece_method_label", "psi_s_method_label", "sample_label")
#: The export's header: the machine columns, then the readable ones.
EXPORT_COLUMNS = COLUMNS + READABLE_COLUMNS
NUMERIC = {"depth_cm", "value", "temp_c", "sp_pct", "tds_factor", "theta_g_pct", "matric_MPa",
           "ec25_dS_m", "ece_dS_m", "psi_s_MPa"}

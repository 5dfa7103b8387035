"""From a submitted reading (API body, imported row) to a stored record.

Validation and conversion happen here, once, for the web API and the command
line alike: the preview and the stored row come from the same call to
:func:`convert_reading` (forms -> science -> results).
"""
from __future__ import annotations

import datetime as dt
import json
import re
import uuid as uuidlib

from . import __version__, store
import numpy as np

from .forms import parse_number, validate_reading
from .results import RoundedColumns, result_for_row
from .science import InputError
from .science.convert import convert_batch, make_batch

NOTE_MAX = 2000
DEFAULT_MAX_AGE_DAYS = 7.0   # see meters.DEFAULT_MAX_AGE_DAYS
SHORT_TEXT_MAX = 120
_UUID_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.:-]{7,63}$")
#: Fields that hold a word from a list (unit, kind, texture...): text only.
WORD_FIELDS = ("unit", "sample", "texture", "crop", "ece_method", "psi_s_route", "salt_type")
#: Free text a client may also send as a number (a replicate group "1", a
#: site "3"): text or a number, never a list or an object.
TEXT_FIELDS = ("site", "uuid", "supersedes", "note", "meter", "replicate_group",
               "visited_by", "taken_at")
#: Numbers, typed or sent as JSON numbers.
NUMBER_FIELDS = ("value", "temp_c", "sp", "depth_cm", "tds_factor", "theta_g_pct",
                 "matric_MPa", "ratio")
#: No field but the note is longer than this; checked before any parsing, so
#: no parser ever sees a megabyte of text.
FIELD_TEXT_MAX = 200


def check_number_text(text: str, field: str) -> None:
    """A typed number so small that it would be stored as 0 ("1e-400") is
    refused rather than silently zeroed."""
    if "e" not in text and "E" not in text:    # no exponent: the usual number, at once
        return
    mantissa = text.strip().lower().split("e", 1)[0]
    if any(c in "123456789" for c in mantissa):
        try:
            x = float(text.strip().replace(",", "."))
        except ValueError:
            return                   # parse_number gives the message
        if x == 0.0:
            raise InputError(f"{text.strip()!r} is too small to store; it would become 0.",
                             field)


def check_fields(payload) -> dict:
    """Refuse a field of the wrong JSON type or of absurd length, before any
    parsing: a list, an object or true where text or a number belongs is a
    400 naming the field, never a crash further down."""
    if not isinstance(payload, dict):
        raise InputError("Send the reading as a JSON object.", "body")
    for key in WORD_FIELDS:
        v = payload.get(key)
        if v is not None and not isinstance(v, str):
            raise InputError(f"{key} must be text, for example "
                             f"{'dS/m' if key == 'unit' else 'as the form offers it'}.", key)
    for key in TEXT_FIELDS:
        v = payload.get(key)
        if v is not None and (isinstance(v, (bool, list, dict))
                              or not isinstance(v, (str, int, float))):
            raise InputError(f"{key} must be text.", key)
    for key in NUMBER_FIELDS:
        v = payload.get(key)
        if isinstance(v, (list, dict)):
            raise InputError(f"{key} must be a number.", key)
        if isinstance(v, str) and key != "ratio" and len(v) <= FIELD_TEXT_MAX:
            check_number_text(v, key)
    v = payload.get("compensated")
    if isinstance(v, (list, dict)):
        raise InputError("compensated must be true or false.", "compensated")
    for key, v in payload.items():
        if isinstance(v, str) and len(v) > (NOTE_MAX if key == "note" else FIELD_TEXT_MAX):
            limit = NOTE_MAX if key == "note" else FIELD_TEXT_MAX
            raise InputError(f"{key} is at most {limit} characters.", key if isinstance(
                key, str) and len(key) <= 40 else "body")
    return payload


def parse_taken_at(text) -> str:
    """ISO 8601 timestamp with its UTC offset. A time without offset takes this
    machine's offset; no time at all means now."""
    if text in (None, ""):
        return dt.datetime.now().astimezone().isoformat(timespec="seconds")
    try:
        t = dt.datetime.fromisoformat(str(text).strip().replace("Z", "+00:00"))
    except ValueError:
        raise InputError("The time must look like 2026-05-14T09:30 (ISO 8601).",
                         "taken_at") from None
    if t.tzinfo is None:
        t = t.astimezone()
    if not (1990 <= t.year <= 2200):
        raise InputError("The date is out of range; check the tablet's clock.", "taken_at")
    return t.isoformat(timespec="seconds")


_LAYER_RE = re.compile(r"^\s*\d{1,3}(?:[.,]\d{1,2})?\s*[-–—]\s*\d{1,3}(?:[.,]\d{1,2})?\s*(?:cm)?\s*$")


def parse_depth(text) -> float | None:
    """A sampling depth in cm, 0 to 500: one number, the bottom of the layer.
    A layer typed as "0-30" gets a message that says what to type."""
    if isinstance(text, str) and len(text) <= 20 and _LAYER_RE.match(text):
        bottom = re.split(r"[-–—]", text)[-1].replace("cm", "").strip()
        raise InputError(f"Type one depth in cm, the bottom of the layer: {bottom} for "
                         f"{text.strip()} cm.", "depth_cm")
    depth = parse_number(text, "depth_cm", "a depth")
    if depth is not None and not (0 <= depth <= 500):
        raise InputError("Depth must be between 0 and 500 cm.", "depth_cm")
    return depth


def _short_text(d: dict, key: str, limit: int = SHORT_TEXT_MAX) -> str | None:
    v = d.get(key)
    if v is None:
        return None
    v = " ".join(str(v).split())
    if len(v) > limit:
        raise InputError(f"{key} is at most {limit} characters.", key)
    return v or None


# --------------------------------------------------------------------------
# The one conversion call: typed fields -> validated -> computed -> result.

def convert_reading(d: dict, context: dict | None = None) -> dict:
    """Validate and convert one reading; the JSON shape of `convert --json`,
    `POST /api/preview` and the stored row: forms.validate_reading, then
    science.convert.convert_batch, then results.result_for_row. ``context`` holds the optional
    context columns (meter, calibration, history, replicates) or a callable
    taking the validated fields and returning them."""
    kw = validate_reading(d)
    if callable(context):
        context = context(kw)
    out = convert_batch(make_batch(**kw, context=context))
    return result_for_row(out, 0, kw)


class RowInputError(InputError):
    """An InputError of one reading in a list; ``index`` says which."""

    def __init__(self, message, field, index):
        super().__init__(message, field)
        self.index = index


def convert_readings(ds: list[dict]) -> list[dict]:
    """Validate and convert many readings in one vectorized pass; the same
    result dicts as :func:`convert_reading` (no context columns). Raises
    RowInputError naming the index of the first reading that cannot be one."""
    kws = []
    for i, d in enumerate(ds):
        try:
            kws.append(validate_reading(d))
        except InputError as e:
            raise RowInputError(e.message, e.field, i) from None
    if not kws:
        return []
    cols = {k: [kw[k] for kw in kws] for k in kws[0]}
    floats = ("ratio_n", "temp_c", "sp_pct", "tds_factor", "theta_g_pct", "matric_MPa")
    for k in floats:
        cols[k] = np.array([np.nan if v is None else v for v in cols[k]], dtype=float)
    for k in ("unit", "sample", "texture", "ece_method", "crop", "salt_type"):
        arr = np.empty(len(kws), dtype=object)
        arr[:] = cols[k]
        cols[k] = arr
    out = _as_lists(convert_batch(make_batch(**cols)))
    rounded = RoundedColumns(out)           # each column rounded once, not a cell at a time
    return [result_for_row(out, i, kw, rounded) for i, kw in enumerate(kws)]


def _as_lists(out: dict) -> dict:
    """The batch's one-dimensional arrays as lists of Python values, read
    once (``ndarray.tolist``) instead of one numpy scalar per cell; the same
    numbers and texts (a float64 is a float, a numpy text a str)."""
    return {k: v.tolist() if isinstance(v, np.ndarray) and v.ndim == 1 else v
            for k, v in out.items()}


def _context(conn, payload, site, max_age_days):
    if conn is None:
        return None
    from . import meters
    return lambda kw: meters.reading_context(conn, kw, payload, site, max_age_days)


def preview(payload: dict, site=None, conn=None,
            max_age_days: float = DEFAULT_MAX_AGE_DAYS) -> dict:
    """The conversion result for a reading, with site defaults applied and,
    given a connection, checked against its meter, calibration and history.

    It runs exactly the validation of a save (:func:`build_record`), so a
    preview that shows no refusal is a reading Save accepts. Where the reading
    converts but a save would refuse it (no site yet, a depth that is not a
    number, a note too long), ``refused`` says which field and why; a reading
    that cannot be converted at all raises InputError as a save does."""
    check_fields(payload)
    result = convert_reading(with_site_defaults(payload, site),
                             context=_context(conn, payload, site, max_age_days))
    try:
        build_record(payload, site, conn, max_age_days, result=result)
    except (InputError, store.StoreError) as e:
        result["refused"] = {"field": e.field or "form", "error": e.message}
    return result


def with_site_defaults(payload: dict, site) -> dict:
    """A site's SP, texture and crop apply when the reading does not give its own."""
    d = dict(payload)
    if site is not None:
        if d.get("sp") in (None, "") and d.get("texture") in (None, ""):
            if site["sp_pct"] is not None:
                d["sp"] = site["sp_pct"]
            elif site["texture"]:
                d["texture"] = site["texture"]
        if d.get("crop") in (None, "") and site["crop"]:
            d["crop"] = site["crop"]
    return d


def build_record(payload: dict, site=None, conn=None,
                 max_age_days: float = DEFAULT_MAX_AGE_DAYS, result: dict | None = None,
                 fields_checked: bool = False) -> dict:
    """Validate a submitted reading and compute everything; a dict for
    store.insert_reading. Raises InputError or StoreError naming the field.
    Given a connection the checks see the meter, calibration and history.
    ``fields_checked``: the caller ran :func:`check_fields` on this payload
    already (the import, before its batch conversion)."""
    if not fields_checked:
        check_fields(payload)
    rid = str(payload.get("uuid") or "").strip() or str(uuidlib.uuid4())
    if not _UUID_RE.match(rid):
        raise InputError("uuid must be 8 to 64 letters, digits or -_.:", "uuid")
    site_name = store.clean_site_name(payload.get("site"))
    if result is None:   # a batch (import) passes the result it converted in bulk
        d = with_site_defaults(payload, site)
        result = convert_reading(d, context=_context(conn, payload, site, max_age_days))
    inp = result["input"]
    depth = parse_depth(payload.get("depth_cm"))
    note = str(payload.get("note") or "").strip()
    if len(note) > NOTE_MAX:
        raise InputError(f"The note is at most {NOTE_MAX} characters.", "note")
    flags = result["flags"]
    return {
        "uuid": rid,
        "site": site_name,
        "sample": inp["sample"],
        "depth_cm": depth,
        "value": inp["value"],
        "unit": inp["unit"],
        "temp_c": inp["temp_c"],
        "compensated": inp["compensated"],
        "ratio": inp["ratio"],
        "sp_pct": inp["sp"],
        "texture": inp["texture"],
        "salt_type": inp.get("salt_type"),
        "tds_factor": inp["tds_factor"],
        "theta_g_pct": inp["theta_g_pct"],
        "matric_MPa": inp["matric_MPa"],
        "meter": _short_text(payload, "meter"),
        "replicate_group": _short_text(payload, "replicate_group"),
        "note": note,
        "taken_at": parse_taken_at(payload.get("taken_at")),
        "visited_by": _short_text(payload, "visited_by") or "",
        "supersedes_uuid": _short_text(payload, "supersedes"),
        "ec25_dS_m": result["ec25_dS_m"],
        "ece_dS_m": result["ece_dS_m"],
        "ece_method": result["ece_method"],
        "psi_s_MPa": result["psi_s_MPa"],
        "psi_s_method": result["psi_s_method"],
        "flags": ";".join(f["code"] for f in flags),
        "result_json": json.dumps(result, ensure_ascii=False, separators=(",", ":")),
        "app_version": __version__,
    }


def save_reading(conn, payload: dict, max_age_days: float = DEFAULT_MAX_AGE_DAYS,
                 device_id: int | None = None):
    """Validate, convert and store; returns (row, created). ``device_id``: the
    paired tablet that sent it, kept beside the reading in the same transaction."""
    check_fields(payload)
    site = None
    if payload.get("site"):
        try:
            site = store.get_site(conn, store.clean_site_name(payload["site"]))
        except store.StoreError:
            site = None
    if payload.get("uuid"):
        existing = store.get_reading(conn, str(payload["uuid"]).strip())
        if existing is not None:   # a resend: answer before recomputing anything
            rec = {"uuid": existing["uuid"], "site": payload.get("site"),
                   "value": parse_number(payload.get("value"), "value"),
                   "unit": str(payload.get("unit") or "").strip()}
            if (str(rec["site"] or "").strip().lower() == existing["site"].lower()
                    and rec["value"] == existing["value"] and rec["unit"] == existing["unit"]):
                return existing, False
    rec = build_record(payload, site, conn, max_age_days)
    confirmed = _confirmed_codes(payload, rec)
    with store.transaction(conn):   # the reading and "saved anyway" notes, together
        row, created = store.insert_reading(conn, rec)
        if created:     # this log took it, and who did (schema 017): sync carries both
            store.note_reading_origin(conn, row["id"], rec.get("visited_by") or None)
        if created and device_id is not None:
            store.note_reading_device(conn, row["id"], device_id)
        if created and confirmed:
            who = rec.get("visited_by") or "the scout"
            for code in confirmed:
                store.insert_ack(conn, row["id"], code, SAVED_ANYWAY_NOTE.format(who=who))
    return row, created


#: What a correction carries over from the version it replaces unless changed.
CORRECTION_CARRIED = ("sample", "depth_cm", "value", "unit", "temp_c", "ratio", "texture",
                      "tds_factor", "theta_g_pct", "matric_MPa", "meter", "replicate_group",
                      "note", "taken_at", "visited_by")


def correct_reading(conn, uuid: str, changes: dict,
                    max_age_days: float = DEFAULT_MAX_AGE_DAYS, device_id: int | None = None):
    """A corrected version of reading ``uuid``: a new reading that points at
    the one it replaces, with the old values except those in ``changes`` (same
    site; same time unless changed on purpose). Returns (row, created)."""
    old = store.get_reading(conn, uuid)
    if old is None:
        raise store.StoreError("No such reading.", "uuid", 404)
    if not isinstance(changes, dict):
        raise InputError("Send the reading as a JSON object.", "body")
    payload = {k: old[k] for k in CORRECTION_CARRIED}
    payload["compensated"] = bool(old["compensated"])
    payload["sp"] = old["sp_pct"]
    payload["salt_type"] = store.stored_salt_type(old)
    payload.update(changes)
    payload["site"] = old["site"]
    payload["supersedes"] = uuid
    return save_reading(conn, payload, max_age_days, device_id)


def ack_flag(conn, uuid: str, code, note) -> dict:
    """Acknowledge a flag of a reading with a note: the flag stays, the note
    says why it is fine."""
    code = str(code or "").strip()
    note = " ".join(str(note or "").split())
    if not code:
        raise InputError("Say which flag (its code) you acknowledge.", "code")
    if not note:
        raise InputError("Add a short note saying why the flag is acceptable.", "note")
    if len(note) > NOTE_MAX:
        raise InputError(f"The note is at most {NOTE_MAX} characters.", "note")
    return store.ack_flag(conn, uuid, code, note)


#: The note kept with an error-level flag that the scout saw and saved anyway.
SAVED_ANYWAY_NOTE = "Seen before saving; saved anyway by {who} on the entry page."


def _confirmed_codes(payload: dict, rec: dict) -> list[str]:
    """Codes of the error-level flags the page showed and the scout chose to
    save anyway (``confirmed_flags``), limited to the reading's own flags."""
    asked = payload.get("confirmed_flags") if isinstance(payload, dict) else None
    if not isinstance(asked, list):
        return []
    have = set(filter(None, (rec.get("flags") or "").split(";")))
    seen: list[str] = []
    for c in asked:
        if isinstance(c, str) and c in have and c not in seen:
            seen.append(c)
    return seen

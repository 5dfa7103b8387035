"""Import, second step: check a file against itself and the log, as it is read.

The rows come in file order, a block at a time (:meth:`Plan.add_block`); the
plan keeps an entry per reading of the file (its uuid, what it corrects,
site, status, line) in the connection's temporary tables (``store.plan_*``),
never in memory, so a long file is checked in memory that stays flat. What
needs the whole file (links, circles, statuses) is checked in SQL by
:meth:`Plan.finish`."""
from __future__ import annotations

from .. import store
from .cells import plain_number
from .columns import COLUMNS
from .reading import ImportError_

#: The columns two rows of one uuid must agree on (the status may differ).
_SAME = tuple(c for c in COLUMNS if c != "status")


def _site_key(name) -> str:
    return " ".join(str(name or "").split()).casefold()


def _refusal(msg: str, field: str = "file") -> ImportError_:
    return ImportError_(msg + " Nothing was imported.", field)


class Plan:
    """A file checked against itself and the log, a block of rows at a time.

    Refused, naming the lines: a uuid twice with different content, a uuid the
    log holds for a different reading (the API's 409), a correction of itself,
    a circle of corrections, a correction onto another site, two corrections of
    one reading, a correction of a reading the log already has corrected or
    void, a correction of a reading that is nowhere, and a row whose status
    says the opposite of what the file shows. Links are resolved over the whole
    file, so the rows may come in any order (a spreadsheet sort). A refusal is
    kept (``error``) and raised by :meth:`finish`, in the order a check of the
    whole file makes them. ``fresh``: how many readings are new to the log
    (staged in file order, numbered from 0)."""

    def __init__(self, conn):
        self.conn = conn
        self.fresh = 0
        self.rows = 0
        self._errors: list[ImportError_ | None] = [None, None]   # within the file; the log
        store.plan_reset(conn)

    @property
    def error(self) -> ImportError_ | None:
        return self._errors[0] or self._errors[1]

    def close(self) -> None:
        """Empty the plan's tables (the import is over)."""
        store.plan_reset(self.conn)

    def add_block(self, rows: list[dict]) -> list[dict]:
        """Index a block of checked rows; returns those new to the log."""
        self.rows += len(rows)
        unique = self._unique(rows)
        named = {r["uuid"] for r in unique} | {r["supersedes_uuid"] for r in unique
                                               if r["supersedes_uuid"]}
        stored = store.readings_brief(self.conn, named) if unique else {}
        fresh, entries, targets, marks = [], [], [], []
        for r in unique:
            t = r["supersedes_uuid"]
            if t and t in stored:
                g = stored[t]
                targets.append((t, g["site"], _site_key(g["site"]), g["status"]))
            if r["flag_acks"] or r["status"] == "void":
                marks.append((r["_line"], r["uuid"], r["flag_acks"], r["status"],
                              r["void_reason"], r["voided_at"]))
            s = stored.get(r["uuid"])
            seq = None
            if s is None:
                seq = self.fresh
                self.fresh += 1
                fresh.append(r)
            elif self._errors[1] is None and (
                    _site_key(s["site"]) != _site_key(r["site"]) or s["value"] != r["value"]
                    or s["unit"] != r["unit"].strip()
                    or (s["supersedes_uuid"] or None) != r["supersedes_uuid"]):
                self._errors[1] = ImportError_(
                    f"line {r['_line']}: the log already holds uuid {r['uuid']} for a "
                    f"different reading ({s['site']}, {plain_number(s['value'])} {s['unit']}); "
                    "the stored one is kept. Nothing was imported.", "uuid")
            entries.append((r["uuid"], t, r["site"], _site_key(r["site"]), r["status"],
                            r["_line"], r.pop("_same"), seq))
        store.plan_add(self.conn, entries, targets, marks)
        return fresh

    def _unique(self, rows: list[dict]) -> list[dict]:
        """The block's rows less repeats of an earlier identical row (in
        this block or an earlier one); a missing uuid or a repeat that
        differs is the file's refusal."""
        for r in rows:
            if isinstance(r["uuid"], str) and r["uuid"].strip():
                r["uuid"] = r["uuid"].strip()
                r["supersedes_uuid"] = (r["supersedes_uuid"] or "").strip() or None
        seen = store.plan_seen(self.conn, list({r["uuid"] for r in rows
                                                if isinstance(r["uuid"], str)}))
        unique = []
        for r in rows:
            if not isinstance(r["uuid"], str) or not r["uuid"]:
                self._errors[0] = self._errors[0] or _refusal(
                    f"line {r['_line']}: the uuid is missing.")
                continue
            same = hash(tuple(r[c] for c in _SAME))
            first = seen.get(r["uuid"])
            if first is None:
                seen[r["uuid"]] = (same, r["_line"])
                r["_same"] = same
                unique.append(r)
            elif first[0] != same and self._errors[0] is None:
                self._errors[0] = _refusal(
                    f"lines {first[1]} and {r['_line']} carry the same uuid {r['uuid']} "
                    "for different readings.")
        return unique

    def finish(self) -> None:
        """Raise the file's first refusal; else the depth of each new
        reading in its chain of corrections within the file is kept for the
        staging (``store.set_import_depths``)."""
        if self.error:
            raise self.error
        _check_corrections(self.conn)
        _check_targets(self.conn)
        circle = store.plan_depths(self.conn)
        if circle:
            raise _refusal("lines " + ", ".join(map(str, circle)) + " correct one another "
                           "in a circle; one of them must be the first reading.")
        _check_status(self.conn)


def _check_corrections(conn) -> None:
    """Refused: a correction of itself, two corrections of one reading
    (whichever line comes first)."""
    own, twice = store.plan_first_self_or_twice(conn)
    if own and (twice is None or own[0] <= twice[0]):
        raise _refusal(f"line {own[0]}: the reading {own[1]} corrects itself.")
    if twice:
        line, t, first = twice
        raise _refusal(f"lines {first} and {line} both correct {t}; a "
                       "reading has one correction (correct the newest version).")


def _check_targets(conn) -> None:
    """Every new correction's target is in the file or current in the log,
    on the same site."""
    bad = store.plan_first_bad_target(conn)
    if bad is None:
        return
    line, t, here, t_line, t_site, log_site, log_status = bad
    if t_line is not None:
        site, where = t_site, f"line {t_line}"
    elif log_status is not None:
        if log_status != "current":
            raise _refusal(f"line {line} corrects {t}, which the log already has "
                           f"{log_status}; correct the newest version instead.")
        site, where = log_site, "the log"
    else:
        raise _refusal(f"line {line} corrects {t}, which is neither in the file nor "
                       "in the log.")
    raise _refusal(f"line {line} corrects a reading of another site ({where}: "
                   f"{site!r}, this line: {here!r}); a correction stays on the "
                   "same site.")


def _check_status(conn) -> None:
    """A row's status agrees with what the file shows of it (a new row is not
    in the log, so only the file can correct it)."""
    bad = store.plan_first_bad_status(conn)
    if bad is None:
        return
    line, status, kid = bad
    if kid is None:
        raise _refusal(f"line {line} says corrected, but no line corrects it; the "
                       "correction is missing from the file.")
    raise _refusal(f"line {line} says {status}, but line {kid} corrects it.")

"""Import, second step: check a file against itself and the log, as it is read.

The rows come in file order, a block at a time (:meth:`Plan.add_block`); the
plan keeps a small entry per reading of the file (its uuid, what it corrects,
site, status, line), never the rows themselves, so a long file is checked in
memory that grows by an entry per row. What needs the whole file (links,
circles, statuses) is checked by :meth:`Plan.finish`."""
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


class _Entry:
    """What the plan keeps of one reading of the file (site and status texts
    are shared between entries: ``words``)."""
    __slots__ = ("uuid", "supersedes_uuid", "site", "status", "line", "same")

    def __init__(self, r: dict, same: int, words: dict):
        self.uuid, self.supersedes_uuid = r["uuid"], r["supersedes_uuid"]
        self.site = words.setdefault(r["site"], r["site"])
        self.status = words.setdefault(r["status"], r["status"])
        self.line, self.same = r["_line"], same


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
    whole file makes them."""

    def __init__(self, conn):
        self.conn = conn
        self.by_uuid: dict[str, _Entry] = {}      # every reading of the file, in file order
        self.fresh: list[_Entry] = []             # those new to the log; staged in this order
        self._words: dict[str, str] = {}
        self.targets: dict[str, dict] = {}        # the log's readings the file corrects
        self.marks: list[dict] = []               # rows with acknowledgements or a void
        self.rows = 0
        self._errors: list[ImportError_ | None] = [None, None]   # within the file; the log

    @property
    def error(self) -> ImportError_ | None:
        return self._errors[0] or self._errors[1]

    def add_block(self, rows: list[dict]) -> list[dict]:
        """Index a block of checked rows; returns those new to the log."""
        self.rows += len(rows)
        unique = [(r, e) for r in rows if (e := self._entry(r)) is not None]
        named = {r["uuid"] for r, _ in unique} | {r["supersedes_uuid"] for r, _ in unique
                                                 if r["supersedes_uuid"]}
        stored = store.readings_brief(self.conn, named) if unique else {}
        fresh = []
        for r, e in unique:
            t = r["supersedes_uuid"]
            if t and t in stored:
                self.targets[t] = stored[t]
            if r["flag_acks"] or r["status"] == "void":
                self.marks.append({c: r[c] for c in ("uuid", "flag_acks", "status",
                                                     "void_reason", "voided_at")})
            s = stored.get(r["uuid"])
            if s is None:
                self.fresh.append(e)
                fresh.append(r)
            elif self._errors[1] is None and (
                    _site_key(s["site"]) != _site_key(r["site"]) or s["value"] != r["value"]
                    or s["unit"] != r["unit"].strip()
                    or (s["supersedes_uuid"] or None) != r["supersedes_uuid"]):
                self._errors[1] = ImportError_(
                    f"line {r['_line']}: the log already holds uuid {r['uuid']} for a "
                    f"different reading ({s['site']}, {plain_number(s['value'])} {s['unit']}); "
                    "the stored one is kept. Nothing was imported.", "uuid")
        return fresh

    def _entry(self, r: dict) -> _Entry | None:
        """The row's entry, None for a repeat of an earlier identical row."""
        if not isinstance(r["uuid"], str) or not r["uuid"].strip():
            self._errors[0] = self._errors[0] or _refusal(
                f"line {r['_line']}: the uuid is missing.")
            return None
        r["uuid"] = r["uuid"].strip()
        r["supersedes_uuid"] = (r["supersedes_uuid"] or "").strip() or None
        same = hash(tuple(r[c] for c in _SAME))
        first = self.by_uuid.get(r["uuid"])
        if first is not None:
            if first.same != same and self._errors[0] is None:
                self._errors[0] = _refusal(
                    f"lines {first.line} and {r['_line']} carry the same uuid {r['uuid']} "
                    "for different readings.")
            return None
        e = self.by_uuid[r["uuid"]] = _Entry(r, same, self._words)
        return e

    def finish(self) -> dict[str, int]:
        """Raise the file's first refusal, else the depth of each new reading
        in its chain of corrections within the file (0: corrects nothing here)."""
        if self.error:
            raise self.error
        child_of = _corrections(self.by_uuid.values())
        _check_targets(self.fresh, self.by_uuid, self.targets)
        depth = _chain_depths(self.fresh, self.by_uuid)
        _check_status(self.fresh, child_of)
        return depth


def plan_import(conn, rows: list[dict]) -> tuple[list[dict], list[dict], dict]:
    """A whole list of checked rows planned at once: (new rows in an order
    where every reading comes before its correction, rows already in the log,
    the log's readings the file corrects)."""
    plan = Plan(conn)
    fresh = plan.add_block(rows)
    depth = plan.finish()
    fresh_ids = {id(r) for r in fresh}
    known = [r for r in rows if id(r) not in fresh_ids and plan.by_uuid.get(r["uuid"])
             and plan.by_uuid[r["uuid"]].line == r["_line"]]
    return sorted(fresh, key=lambda r: (depth[r["uuid"]], r["_line"])), known, plan.targets


def _corrections(entries) -> dict[str, _Entry]:
    """Target uuid -> the entry that corrects it; refused: a correction of
    itself, two corrections of one reading."""
    child_of: dict[str, _Entry] = {}
    for r in entries:
        t = r.supersedes_uuid
        if t is None:
            continue
        if t == r.uuid:
            raise _refusal(f"line {r.line}: the reading {t} corrects itself.")
        if t in child_of:
            raise _refusal(f"lines {child_of[t].line} and {r.line} both correct {t}; a "
                           "reading has one correction (correct the newest version).")
        child_of[t] = r
    return child_of


def _check_targets(fresh: list[_Entry], by_uuid: dict, stored: dict) -> None:
    """Every new correction's target is in the file or current in the log,
    on the same site."""
    for r in fresh:
        t = r.supersedes_uuid
        if t is None:
            continue
        if t in by_uuid:
            site = by_uuid[t].site
            where = f"line {by_uuid[t].line}"
        elif t in stored:
            site = stored[t]["site"]
            where = "the log"
            if stored[t]["status"] != "current":
                raise _refusal(f"line {r.line} corrects {t}, which the log already has "
                               f"{stored[t]['status']}; correct the newest version instead.")
        else:
            raise _refusal(f"line {r.line} corrects {t}, which is neither in the file nor "
                           "in the log.")
        if _site_key(site) != _site_key(r.site):
            raise _refusal(f"line {r.line} corrects a reading of another site ({where}: "
                           f"{site!r}, this line: {r.site!r}); a correction stays on the "
                           "same site.")


def _chain_depths(fresh: list[_Entry], by_uuid: dict) -> dict[str, int]:
    """How deep each new row sits in its chain of new corrections; a circle is
    refused. Every row has at most one target and one correction, so a walk
    from each new row either ends outside the new rows or comes back to it."""
    fresh_uuids = {r.uuid for r in fresh}
    depth: dict[str, int] = {}
    for r in fresh:
        path, u = [], r.uuid
        while u in fresh_uuids and u not in depth:
            if u in path:
                lines = sorted(by_uuid[x].line for x in path[path.index(u):])
                raise _refusal("lines " + ", ".join(map(str, lines)) + " correct one another "
                               "in a circle; one of them must be the first reading.")
            path.append(u)
            u = by_uuid[u].supersedes_uuid
        base = depth.get(u, -1) if u in fresh_uuids else -1
        for x in reversed(path):
            base += 1
            depth[x] = base
    return depth


def _check_status(fresh: list[_Entry], child_of: dict) -> None:
    """A row's status agrees with what the file shows of it (a new row is not
    in the log, so only the file can correct it)."""
    for r in fresh:
        kid = child_of.get(r.uuid)
        if r.status == "corrected" and kid is None:
            raise _refusal(f"line {r.line} says corrected, but no line corrects it; the "
                           "correction is missing from the file.")
        if r.status != "corrected" and kid is not None:
            raise _refusal(f"line {r.line} says {r.status}, but line {kid.line} "
                           "corrects it.")

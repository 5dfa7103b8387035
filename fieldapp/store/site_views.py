"""What the site views select (site page, visit report, summary API): the few
rows each part of the interpretation needs, chosen by the database.

A site of 25,000 readings is not read whole. One pass over the index of
schema 019 gives, for each sample kind, depth and day, the count of current
readings and the lowest, highest and mean value (:func:`day_totals`); from
those the latest day of each depth, the last two soil days, the latest water,
substrate and feed/leachate days and each chart's time buckets are known, and
only the readings of those days (or only those holding a bucket's extreme)
are fetched (:func:`picked_rows`), with every current reading that carries a
warning or an error (:func:`flagged_rows`). ``fieldapp.interpret`` gives the
rows their meaning; what it computes from them is the same as from every
reading of the site (``tests/test_site_views.py`` holds the two side by side).

"Current" is the definition of the ``reading_status`` view (schema 001):
neither voided nor replaced by a correction. It is written here as two
``NOT IN`` tests, because joining the view costs a lookup of every reading's
full row, which is what this module avoids. Portable SQL only (``?``
placeholders, CTEs, CASE, MIN/MAX/AVG, GROUP BY, substr): the days are
``substr(taken_at, 1, 10)``, which is how every visit's date is made
(``readings._visit_id``, ``imports``).
"""
from __future__ import annotations

import datetime as dt
from collections import defaultdict

from .core import VIEW_COLUMNS
from .sites import open_flag_counts

SOIL = ("paste", "extract")
SOLUTIONS = ("water", "feed", "leachate", "drain", "sme", "media")
SUBSTRATE = ("sme", "media", "leachate")
FEED_LEACHATE = ("feed", "leachate")

_CURRENT = ("r.id NOT IN (SELECT reading_id FROM voids) AND r.id NOT IN "
            "(SELECT supersedes_id FROM readings WHERE supersedes_id IS NOT NULL)")
#: The value a reading is drawn and interpreted by: ECe for soil, EC25 else.
_Y = (f"CASE WHEN r.sample IN {SOIL!r} THEN r.ece_dS_m "
      f"WHEN r.sample IN {SOLUTIONS!r} THEN r.ec25_dS_m END")

_ROW_COLS = ("r.id, r.uuid, r.sample, r.depth_cm, r.taken_at, r.ratio, r.theta_g_pct, "
             "r.matric_MPa, r.meter, r.ec25_dS_m, r.ece_dS_m, r.ece_method, r.flags, "
             + ", ".join("r." + c for c in VIEW_COLUMNS) + ", v.visit_date")
#: What a chart point and a feed/leachate key read: all in the index of schema 019.
_KEY_COLS = "r.id, r.uuid, r.sample, r.depth_cm, r.taken_at, r.ece_dS_m, r.ec25_dS_m, r.flags"


def next_day(day: str) -> str:
    """The day after a YYYY-MM-DD day: ``taken_at < next_day(d)`` is
    ``substr(taken_at, 1, 10) <= d`` as a range the index can walk."""
    return (dt.date.fromisoformat(day) + dt.timedelta(days=1)).isoformat()


def _before(as_of: str | None) -> tuple[str, tuple]:
    """Readings up to the end of day ``as_of``, written on the day itself
    (``substr``) rather than as a range of ``taken_at``: a range would lead
    SQLite to the (site_id, taken_at) index, which is not covering, so every
    reading of the site would be read whole with its result JSON (3x slower
    on a site of 25,000 readings); the day test keeps the pass on the
    covering index of schema 019."""
    return ("", ()) if as_of is None else (" AND substr(r.taken_at, 1, 10) <= ?", (as_of,))


def _ids(ids: tuple | None) -> tuple[str, tuple]:
    """Readings with ``ids[0] < id <= ids[1]`` (``ids[0]`` None: from the first)."""
    if ids is None:
        return "", ()
    lo, hi = ids
    if lo is None:   # "+ 0": not a range SQLite would walk the (site_id, id) index for
        return " AND r.id + 0 <= ?", (hi,)
    return " AND r.id > ? AND r.id <= ?", (lo, hi)


def day_totals(conn, site_id: int, as_of: str | None = None,
               ids: tuple | None = None) -> list[dict]:
    """For each sample kind, depth and day (up to ``as_of``): how many current
    readings (``n``), how many with a value (``n_y``) and their lowest,
    highest, summed and mean value (ECe for soil, EC at 25 °C for
    solutions). ``ids``: of the readings in that range of ids only
    (:func:`_ids`; what :class:`SiteCache` counts or adds to totals it holds)."""
    cond, args = _before(as_of)
    cond2, args2 = _ids(ids)
    sql = (f"SELECT r.sample, r.depth_cm, substr(r.taken_at, 1, 10) AS day, COUNT(*) AS n, "
           f"COUNT({_Y}) AS n_y, MIN({_Y}) AS lo, MAX({_Y}) AS hi, SUM({_Y}) AS total "
           f"FROM readings r WHERE r.site_id = ?{cond}{cond2} AND {_CURRENT} "
           f"GROUP BY r.sample, r.depth_cm, substr(r.taken_at, 1, 10) ORDER BY day")
    out = [dict(zip(row.keys(), row)) for row in conn.execute(sql, (site_id, *args, *args2))]
    for t in out:
        t["mean"] = t["total"] / t["n_y"] if t["n_y"] else None
    return out


def reading_count(conn, site_id: int) -> int:
    """Every reading version of the site (current, corrected and void)."""
    return conn.execute("SELECT COUNT(*) FROM readings WHERE site_id = ?",
                        (site_id,)).fetchone()[0]


def _pick(sample, day, depth=..., y=None, last_day=None) -> tuple:
    """One VALUES row: a sample kind, a depth (``...``: any), a day range
    [day, last_day] and a value (None: every reading)."""
    any_depth = depth is ...
    return (sample, 1 if any_depth else 0, None if any_depth else depth, day,
            next_day(last_day or day), y)


_PICKS = ("CAST(? AS TEXT), CAST(? AS INTEGER), CAST(? AS DOUBLE PRECISION), "
          "CAST(? AS TEXT), CAST(? AS TEXT), CAST(? AS DOUBLE PRECISION)")


#: How a pick names its depth: any depth, one depth, or no depth given.
_DEPTH = {"any": "", "one": " AND r.depth_cm = w.depth", "none": " AND r.depth_cm IS NULL"}


def picked_rows(conn, site_id: int, picks, keys_only: bool = False) -> list[dict]:
    """The current readings matching any pick (:func:`_pick`), oldest first
    (by ``taken_at``, then id), each once, with their flags (``flags``,
    ``flag_list``). ``keys_only``: the columns of a chart point
    (``_KEY_COLS``), read from the index alone."""
    groups: dict[str, list] = {"any": [], "one": [], "none": []}
    for p in dict.fromkeys(picks):
        groups["any" if p[1] else "none" if p[2] is None else "one"].append(p)
    found: dict[int, dict] = {}
    cols = _KEY_COLS if keys_only else _ROW_COLS
    join = "" if keys_only else " JOIN visits v ON v.id = r.visit_id"
    for mode, ps in groups.items():
        for k in range(0, len(ps), 400):
            part = ps[k:k + 400]
            sql = (f"WITH w (sample, any_depth, depth, d0, d1, y) AS (VALUES "
                   + ", ".join(f"({_PICKS})" for _ in part) + f") "
                   f"SELECT {cols} FROM w JOIN readings r ON r.site_id = ? "
                   f"AND r.sample = w.sample{_DEPTH[mode]} "
                   f"AND r.taken_at >= w.d0 AND r.taken_at < w.d1{join} "
                   f"WHERE (w.y IS NULL OR {_Y} = w.y) AND {_CURRENT}")
            for row in conn.execute(sql, [x for p in part for x in p] + [site_id]):
                found[row["id"]] = dict(zip(row.keys(), row))
    return _with_flags(conn, sorted(found.values(), key=lambda r: (r["taken_at"], r["id"])))


def flagged_rows(conn, site_id: int, as_of: str | None = None,
                 ids: tuple | None = None) -> list[dict]:
    """Current readings with a value (up to ``as_of``; in ``ids``, :func:`_ids`)
    that carry a warning or an error, as chart points (``_KEY_COLS``): a
    chart keeps every one."""
    cond, args = _before(as_of)
    cond2, args2 = _ids(ids)
    sql = (f"SELECT {_KEY_COLS} FROM readings r "
           f"WHERE r.site_id = ? AND r.sample IN {SOIL + SOLUTIONS!r}{cond}{cond2} "
           f"AND r.flags <> '' AND {_Y} IS NOT NULL AND {_CURRENT} "
           f"AND EXISTS (SELECT 1 FROM reading_flags f WHERE f.reading_id = r.id "
           f"AND f.severity IN ('warning', 'error'))")
    rows = [dict(zip(r.keys(), r)) for r in conn.execute(sql, (site_id, *args, *args2))]
    return _with_flags(conn, sorted(rows, key=lambda r: (r["taken_at"], r["id"])))


def _with_flags(conn, rows: list[dict]) -> list[dict]:
    """``flags`` as a list of codes and ``flag_list`` (code and severity, in
    the reading's order) from ``reading_flags``, as ``view_readings`` gives them."""
    ids = [r["id"] for r in rows if r["flags"]]
    sev: dict[int, dict[str, str]] = defaultdict(dict)
    for k in range(0, len(ids), 500):
        part = ids[k:k + 500]
        for fid, code, s in conn.execute(
                "SELECT reading_id, code, severity FROM reading_flags WHERE reading_id IN ("
                + ",".join("?" * len(part)) + ")", part):
            sev[fid][code] = s
    for r in rows:
        r["flags"] = [c for c in r["flags"].split(";") if c]
        r["flag_list"] = [{"code": c, "severity": sev[r["id"]].get(c)} for c in r["flags"]]
        r["status"] = "current"
    return rows


# ---------------------------------------------------------------- kept between requests

#: How many voids and corrections the log holds: a void or a correction takes
#: a reading out of "current"; readings are never updated or deleted, so
#: nothing else can. Two index lookups, shared by the two states below.
_OUT_OF_CURRENT = ("(SELECT COUNT(*) FROM voids), "
                   "(SELECT COUNT(supersedes_id) FROM readings WHERE supersedes_id IS NOT NULL)")


def log_state(conn, site_id: int) -> tuple:
    """What tells whether a site's current readings changed: its newest
    reading id and the voids and corrections counted by :data:`_OUT_OF_CURRENT`."""
    return tuple(conn.execute(
        f"SELECT (SELECT MAX(id) FROM readings WHERE site_id = ?), {_OUT_OF_CURRENT}",
        (site_id,)).fetchone())


def log_flag_state(conn) -> tuple:
    """What tells whether the sites list's "to check" counts changed: the
    newest reading id, the voids and corrections (:data:`_OUT_OF_CURRENT`)
    and how many acknowledgements the log holds."""
    return tuple(conn.execute(
        f"SELECT (SELECT MAX(id) FROM readings), {_OUT_OF_CURRENT}, "
        "(SELECT COUNT(*) FROM flag_acks)").fetchone())


def reading_counts(conn, ids: tuple) -> dict[int, int]:
    """Per site, how many reading versions have ``ids[0] < id <= ids[1]``
    (:func:`_ids`; every version, as ``list_sites`` counts them)."""
    cond, args = _ids(ids)
    return dict(tuple(r) for r in conn.execute(
        f"SELECT r.site_id, COUNT(*) FROM readings r WHERE 1 = 1{cond} GROUP BY r.site_id", args))


def _merge_totals(old: list[dict], new: list[dict]) -> list[dict]:
    """Day totals of older readings and of newer ones as the totals of both."""
    by_key = {(t["sample"], t["depth_cm"], t["day"]): dict(t) for t in old}
    for t in new:
        k = (t["sample"], t["depth_cm"], t["day"])
        o = by_key.get(k)
        if o is None:
            by_key[k] = dict(t)
            continue
        o["n"] += t["n"]
        if t["n_y"]:
            o["lo"] = t["lo"] if o["lo"] is None else min(o["lo"], t["lo"])
            o["hi"] = t["hi"] if o["hi"] is None else max(o["hi"], t["hi"])
            o["total"] = (o["total"] or 0.0) + t["total"]
            o["n_y"] += t["n_y"]
            o["mean"] = o["total"] / o["n_y"]
    return sorted(by_key.values(), key=lambda t: t["day"])


#: Answers of site_rows kept per site (the site page's and a report's or two).
MOST_KEPT_VIEWS = 3


class SiteCache:
    """The day totals and flagged readings of recently viewed sites, kept
    between requests so that a site page does not walk all of a site's
    readings again each time (25,000 at a busy site). Checked against
    :func:`log_state` on every use: readings saved since are added from a
    query over them alone; a void or a correction anywhere in the log makes
    the site's totals be counted afresh. At most ``most`` sites are kept (the
    least recently viewed goes first), each with the rows its views last
    read (:meth:`rows`); every site's reading count (:meth:`reading_counts`)
    and the sites list's "to check" counts (:meth:`open_flags`) are kept the
    same way. Safe to share between threads.

    It relies on ids being given in commit order, so that an id at or below
    the newest one seen is never new: one writer at a time on both backends
    (SQLite's BEGIN IMMEDIATE; on PostgreSQL the advisory write lock that
    ``store.transaction`` takes before any insert). A writer that bypassed
    ``store.transaction`` would break that."""

    def __init__(self, most: int = 32):
        import threading
        from collections import OrderedDict
        self.most = most
        self._sites: OrderedDict = OrderedDict()
        self._lock = threading.Lock()

    def site(self, conn, site_id: int) -> tuple[list[dict], list[dict]]:
        """(day totals, flagged readings) of every day of the site, oldest first."""
        return self._site(conn, site_id)[:2]

    def rows(self, conn, site_id: int, key, make):
        """What ``make(totals, flagged)`` gives (``site_select.site_rows``'s
        answer for ``key``: its as_of and keep_day), kept while the site's
        readings stay as they are (at most :data:`MOST_KEPT_VIEWS` per site).
        Read-only: every caller shares it."""
        totals, flagged, kept = self._site(conn, site_id)
        if key not in kept:
            while len(kept) >= MOST_KEPT_VIEWS:
                kept.pop(next(iter(kept)), None)
            kept[key] = make(totals, flagged)
        return dict(kept[key])

    def _site(self, conn, site_id: int) -> tuple[list[dict], list[dict], dict]:
        state = log_state(conn, site_id)
        with self._lock:
            held = self._sites.get(site_id)
        top = state[0]
        if top is None:                       # no reading at the site
            return [], [], {}
        if held is not None and held[0] == state:
            return held[1], held[2], held[3]
        if held is not None and held[0][1:] == state[1:] and held[0][0] < top:
            # only readings saved since: add theirs (ids bound the queries, so a
            # reading saved during this request is left for the next one)
            ids = (held[0][0], top)
            totals = _merge_totals(held[1], day_totals(conn, site_id, ids=ids))
            flagged = sorted(held[2] + flagged_rows(conn, site_id, ids=ids),
                             key=lambda r: (r["taken_at"], r["id"]))
        else:
            ids = (None, top)
            totals, flagged = day_totals(conn, site_id, ids=ids), flagged_rows(conn, site_id, ids=ids)
        kept: dict = {}
        self._keep(site_id, (state, totals, flagged, kept))
        return totals, flagged, kept

    def open_flags(self, conn, site_ids) -> dict[int, int]:
        """``store.open_flag_counts`` of these sites, from counts of the whole
        log kept like the day totals (readings saved since are counted alone;
        a void, correction or acknowledgement counts afresh)."""
        counts = self._kept_counts("open_flags", log_flag_state(conn), lambda ids: open_flag_counts(
            conn, ids=(ids[0] or 0, ids[1])))
        return {s: counts[s] for s in site_ids if counts.get(s)}

    def reading_counts(self, conn) -> dict[int, int]:
        """Every site's count of reading versions, kept between requests:
        readings are never deleted, so readings saved since are counted alone."""
        top = conn.execute("SELECT MAX(id) FROM readings").fetchone()[0]
        return self._kept_counts("reading_counts", (top,), lambda ids: reading_counts(conn, ids))

    def _kept_counts(self, key, state: tuple, count) -> dict[int, int]:
        """Per-site counts kept under ``key``. ``state`` starts with the newest
        reading id; while the rest of it stays the same and the id only grows,
        the readings saved since are counted alone and added. ``count((lo,
        hi))`` counts the readings with lo < id <= hi (lo None: from the first)."""
        with self._lock:
            held = self._sites.get(key)
        if state[0] is None:
            return {}
        if held is not None and held[0] == state:
            return held[1]
        if held is not None and held[0][1:] == state[1:] and held[0][0] < state[0]:
            counts = dict(held[1])
            for sid, n in count((held[0][0], state[0])).items():
                counts[sid] = counts.get(sid, 0) + n
        else:
            counts = count((None, state[0]))
        self._keep(key, (state, counts))
        return counts

    def _keep(self, key, value) -> None:
        with self._lock:
            self._sites[key] = value
            self._sites.move_to_end(key)
            while len(self._sites) > self.most:
                self._sites.popitem(last=False)


def flagged_page(conn, cache: SiteCache, site_id: int, sample: str | None = None,
                 date_from: str | None = None, date_to: str | None = None, limit: int = 50,
                 after: str | None = None) -> tuple[list, str | None]:
    """One page of the site's flagged readings (current, a warning or an
    error: the flagged points of its charts, kept by ``cache``), newest first
    by (taken_at, id), as ``readings_page`` gives rows, and the next cursor.
    The site log's "Flagged readings" list: a chart that labels only its
    latest flagged points links here for every one of them."""
    from .paging import decode_cursor, encode_cursor
    from .readings import get_reading
    rows = [r for r in cache.site(conn, site_id)[1]
            if (not sample or r["sample"] == sample)
            and (not date_from or r["taken_at"] >= date_from)
            and (not date_to or r["taken_at"] < date_to + "\uffff")]
    rows.sort(key=lambda r: (r["taken_at"], r["id"]), reverse=True)
    if after is not None:
        key = tuple(decode_cursor(after, (str, int)))
        rows = [r for r in rows if (r["taken_at"], r["id"]) < key]
    page = [get_reading(conn, r["uuid"]) for r in rows[:limit]]
    page = [r for r in page if r is not None]
    nxt = encode_cursor(page[-1]["taken_at"], page[-1]["id"]) if len(rows) > limit and page else None
    return page, nxt

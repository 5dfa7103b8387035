"""Sync between devices and an office (fieldapp/sync.py, web/office.py,
store/sync.py), in-process: the office is a Flask app and each device talks
to it through the office's test client; a transport can drop the
connection before or after the office handles a request.

The office runs on both backends (``BOTH_BACKENDS``: its log is a SQLite
file or a fresh PostgreSQL database); devices are laptops and tablets, always
on their own SQLite file."""
from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

from fieldapp import create_app, records, store
from fieldapp import sync as syncmod
from conftest import make_app
from fieldapp.web.pairing import format_code, new_code

BOTH_BACKENDS = True


class ClientTransport:
    """The device's side of the protocol over the office's Flask test client.
    ``drop(path, when)`` -> True drops that call: ``when`` is "before" (the
    office never sees it) or "after" (the office handled it, the answer was lost)."""

    base = "http://127.0.0.1:8080"

    def __init__(self, client, drop=None):
        self.client = client
        self.drop = drop
        self.calls: list[str] = []

    def post(self, path, body, token=None):
        headers = {"Authorization": f"Bearer {token}"} if token else {}
        if self.drop and self.drop(path, "before"):
            raise syncmod.SyncError("connection dropped (test)", retry=True)
        r = self.client.post(path, data=json.dumps(body), content_type="application/json",
                             headers=headers)
        self.calls.append(path)
        if self.drop and self.drop(path, "after"):
            raise syncmod.SyncError("answer lost (test)", retry=True)
        return r.status_code, r.get_json() or {}

    def close(self):
        pass


@pytest.fixture
def office_app(tmp_path, backend, request):
    """The office: the same application on its own log (SQLite or PostgreSQL)."""
    yield from make_app(tmp_path / "office", backend, request)


@pytest.fixture
def office_db(office_app):
    conn = store.connect(office_app.config["DATABASE"])
    yield conn
    conn.close()


@pytest.fixture
def devices(tmp_path):
    """make(name) -> a device log's connection (closed at the end)."""
    made = []

    def make(name):
        d = tmp_path / f"device-{name}"
        d.mkdir()
        conn = store.connect(d / store.DB_NAME)
        made.append(conn)
        return conn
    yield make
    for c in made:
        c.close()


def pair(device, office_app, office_db, name, person, transport=None):
    code = new_code(office_db)["code"]
    t = transport or ClientTransport(office_app.test_client())
    syncmod.pair(device, t, format_code(code), name, person)
    return t


def save(conn, site="Block 3", value="1.2", **kw):
    body = {"site": site, "sample": "water", "value": value, "unit": "dS/m", "temp_c": "25",
            **kw}
    row, created = records.save_reading(conn, body)
    assert created
    return row["uuid"]


def uuids(conn):
    return {r[0] for r in conn.execute("SELECT uuid FROM readings")}


def test_pair_push_and_pull_a_followed_site(office_app, office_db, devices):
    a, b = devices("a"), devices("b")
    ta = pair(a, office_app, office_db, "Tablet 1", "Scout A")
    first = save(a, "Block 3", "1.2")
    fixed, _ = records.correct_reading(a, first, {"value": "1.4"})
    voided = save(a, "Block 3", "9.9")
    store.void_reading(a, voided, "probe not rinsed")
    save(a, "Block 4", "0.8")
    res = syncmod.sync(a, ta)
    assert res["readings_new_at_office"] == 4 and res["batches_sent"] == 1
    assert uuids(office_db) == uuids(a)
    off = store.get_reading(office_db, fixed["uuid"])
    assert off["supersedes_uuid"] == first and off["status"] == "current"
    assert store.get_reading(office_db, voided)["status"] == "void"
    # who took it: the person set at pairing, the device's name
    who = office_db.execute("SELECT o.person, o.device_name FROM reading_origin o JOIN readings r "
                            "ON r.id = o.reading_id WHERE r.uuid = ?", (first,)).fetchone()
    assert tuple(who) == ("Scout A", "Tablet 1")

    tb = pair(b, office_app, office_db, "Tablet 2", "Scout B")
    store.follow_site(b, "block 3")                  # case as typed does not matter
    res = syncmod.sync(b, tb)
    site3 = {r[0] for r in office_db.execute(
        "SELECT r.uuid FROM readings r JOIN sites s ON s.id = r.site_id WHERE s.name = 'Block 3'")}
    assert uuids(b) == site3 and res["readings_received"] == 3    # not Block 4
    assert store.get_reading(b, voided)["status"] == "void"
    assert store.get_reading(b, fixed["uuid"])["supersedes_uuid"] == first
    # B pushes nothing of what it received, and a second sync changes nothing
    before = store.log_fingerprint(office_db)
    again = syncmod.sync(b, tb)
    assert again["batches_sent"] == 0 and again["readings_received"] == 0
    assert store.log_fingerprint(office_db) == before
    own = save(b, "Block 3", "2.0")
    res = syncmod.sync(b, tb)
    assert res["readings_sent"] == 1 and store.get_reading(office_db, own) is not None
    # the office views: who sent what
    acts = {(x["person"], x["device_name"]): x["n"] for x in store.scout_activity(office_db)}
    assert acts == {("Scout A", "Tablet 1"): 4, ("Scout B", "Tablet 2"): 1}
    page = office_app.test_client().get("/office").get_data(as_text=True)
    assert "Scout B" in page and "Tablet 2" in page
    sid = store.get_site(office_db, "Block 3")["id"]
    mine = office_app.test_client().get(f"/office/sites/{sid}?person=Scout+B").get_data(
        as_text=True)
    assert own in mine and first not in mine


def test_resend_changes_nothing(office_app, office_db, devices):
    a = devices("a")
    t = pair(a, office_app, office_db, "Tablet 1", "Scout A")
    for i in range(7):
        save(a, "Block 3", f"1.{i}")
    save(a, "Block 3", "5", confirmed_flags=[])
    syncmod.sync(a, t, max_items=3)
    before = store.log_fingerprint(office_db)
    n_hist = office_db.execute("SELECT COUNT(*) FROM site_history").fetchone()[0]
    store.set_setting(a, store.sync.PUSH_CURSOR, "{}")     # forget every confirmation
    res = syncmod.sync(a, t, max_items=3)
    assert res["readings_sent"] == 8 and res["readings_new_at_office"] == 0
    assert store.log_fingerprint(office_db) == before
    assert office_db.execute("SELECT COUNT(*) FROM site_history").fetchone()[0] == n_hist


@pytest.mark.parametrize("when", ["before", "after"])
def test_dropped_connection_mid_sync_resumes_without_loss_or_doubles(office_app, office_db,
                                                                     devices, when):
    """The connection drops on the second push batch: before the office sees
    it, or after the office committed it and the answer was lost."""
    a = devices("a")
    pair(a, office_app, office_db, "Tablet 1", "Scout A")
    ids = [save(a, f"Block {i % 2}", f"1.{i}") for i in range(10)]
    store.void_reading(a, ids[7], "wrong cup")
    pushes = {"n": 0}

    def drop(path, moment):
        if path == "/api/sync/push" and moment == when:
            pushes["n"] += 1
            return pushes["n"] == 2
        return False
    t = ClientTransport(office_app.test_client(), drop)
    with pytest.raises(syncmod.SyncError) as e:
        syncmod.sync(a, t, max_items=3)
    assert e.value.retry
    n_office = len(uuids(office_db))
    assert n_office == (3 if when == "before" else 6)         # batch 2 kept whole, or not at all
    res = syncmod.sync(a, t, max_items=3)
    assert uuids(office_db) == uuids(a)
    assert office_db.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 10
    assert res["readings_new_at_office"] == 10 - n_office
    assert store.get_reading(office_db, ids[7])["status"] == "void"


def test_dropped_pull_resumes(office_app, office_db, devices):
    a, b = devices("a"), devices("b")
    ta = pair(a, office_app, office_db, "Tablet 1", "Scout A")
    for i in range(9):
        save(a, "Block 3", f"1.{i}")
    syncmod.sync(a, ta)
    calls = {"n": 0}

    def drop(path, moment):
        if path == "/api/sync/pull" and moment == "after":
            calls["n"] += 1
            return calls["n"] == 2
        return False
    tb = pair(b, office_app, office_db, "Tablet 2", "Scout B",
              ClientTransport(office_app.test_client(), drop))
    store.follow_site(b, "Block 3")
    with pytest.raises(syncmod.SyncError):
        syncmod.sync(b, tb, max_items=4)
    assert len(uuids(b)) == 4                 # the first batch, with its cursor
    syncmod.sync(b, tb, max_items=4)
    assert uuids(b) == uuids(a)


def test_a_batch_is_kept_whole_or_not_at_all(office_app, office_db, devices):
    a = devices("a")
    t = pair(a, office_app, office_db, "Tablet 1", "Scout A")
    save(a, "Block 3", "1.2")
    items, _, _ = store.push_batch(a, {})
    bad = json.loads(json.dumps(items["readings"][0]))
    bad["uuid"], bad["value"] = "another-reading-1", "lots"        # not a number
    items["readings"].append(bad)
    token = store.get_setting(a, store.sync.OFFICE_TOKEN)
    status, answer = t.post("/api/sync/push", {"items": items}, token)
    assert status == 400 and "refused whole" in answer["error"]
    assert uuids(office_db) == set()                  # the good reading was not kept either
    assert office_db.execute("SELECT COUNT(*) FROM sites").fetchone()[0] == 0


def test_two_devices_correct_the_same_reading(office_app, office_db, devices):
    a, b = devices("a"), devices("b")
    ta = pair(a, office_app, office_db, "Tablet 1", "Scout A")
    tb = pair(b, office_app, office_db, "Tablet 2", "Scout B")
    for d in (a, b):
        store.follow_site(d, "Block 3")
    orig = save(a, "Block 3", "1.2")
    syncmod.sync(a, ta)
    syncmod.sync(b, tb)
    ca, _ = records.correct_reading(a, orig, {"value": "1.25"})
    cb, _ = records.correct_reading(b, orig, {"value": "1.3"})
    syncmod.sync(a, ta)
    res = syncmod.sync(b, tb)
    assert res["marked_for_review"] == 1
    syncmod.sync(a, ta)
    for log in (office_db, a, b):
        assert {ca["uuid"], cb["uuid"], orig} <= uuids(log)   # both versions kept everywhere
        pairs = store.review_pairs(log)
        assert len(pairs) == 1 and pairs[0]["supersedes_uuid"] == orig
        assert {pairs[0]["rival"], pairs[0]["linked"]} == {ca["uuid"], cb["uuid"]}
    assert store.log_fingerprint(a) == store.log_fingerprint(b) == store.log_fingerprint(office_db)
    sid = store.get_site(office_db, "Block 3")["id"]
    page = office_app.test_client().get(f"/office/sites/{sid}").get_data(as_text=True)
    assert "Corrections to review" in page and orig in page
    log_page = office_app.test_client().get(f"/sites/{sid}").get_data(as_text=True)
    assert 'id="review-mark"' in log_page and "corrected on two devices" in log_page


def test_site_settings_take_the_latest_change_and_keep_history(office_app, office_db, devices,
                                                               monkeypatch):
    import fieldapp.store.sites as sites_mod
    a, b = devices("a"), devices("b")
    ta = pair(a, office_app, office_db, "Tablet 1", "Scout A")
    tb = pair(b, office_app, office_db, "Tablet 2", "Scout B")
    for d in (a, b):
        store.follow_site(d, "Block 3")
    save(a, "Block 3", "1.2")
    syncmod.sync(a, ta)
    syncmod.sync(b, tb)
    sid_a, sid_b = store.get_site(a, "Block 3")["id"], store.get_site(b, "Block 3")["id"]
    monkeypatch.setattr(sites_mod, "utc_now", lambda: "2030-01-01T10:00:00+00:00")
    store.change_site_settings(a, sid_a, {"crop": "tomato"})        # the earlier change
    monkeypatch.setattr(sites_mod, "utc_now", lambda: "2030-01-01T11:00:00+00:00")
    store.change_site_settings(b, sid_b, {"crop": "pepper", "sp_pct": 45.0})
    monkeypatch.undo()
    syncmod.sync(b, tb)             # the later change reaches the office first
    syncmod.sync(a, ta)
    syncmod.sync(b, tb)
    for log in (office_db, a, b):
        site = store.get_site(log, "Block 3")
        assert site["crop"] == "pepper" and site["sp_pct"] == 45.0
        crops = [h["new_value"] for h in store.site_history(log, site["id"])
                 if h["field"] == "crop"]
        assert sorted(crops) == ["pepper", "tomato"]      # the history keeps both


def test_rename_travels_and_readings_follow(office_app, office_db, devices):
    a = devices("a")
    t = pair(a, office_app, office_db, "Tablet 1", "Scout A")
    save(a, "Block 3", "1.2")
    syncmod.sync(a, t)
    sid = store.get_site(a, "Block 3")["id"]
    store.change_site_settings(a, sid, {"name": "Block 3 North"})
    later = save(a, "Block 3 North", "1.3")
    syncmod.sync(a, t)
    assert office_db.execute("SELECT COUNT(*) FROM sites").fetchone()[0] == 1
    assert store.get_reading(office_db, later)["site"] == "Block 3 North"


@pytest.mark.parametrize("url", ["http://192.168.1.20:8080", "http://office.example",
                                 "http://10.0.0.5", "ftp://office.example"])
def test_token_is_never_sent_over_plain_http_to_another_machine(url, tmp_path):
    with pytest.raises(syncmod.SyncError) as e:
        syncmod.check_office_url(url)
    assert "http" in e.value.message
    r = CliRunner().invoke(__import__("fieldapp.cli", fromlist=["cli"]).cli,
                           ["sync", url, "--code", "ABCD-EFGH", "--data", str(tmp_path)])
    assert r.exit_code == 2 and ("Refused" in r.output or "not an address" in r.output)
    conn = store.connect(tmp_path / store.DB_NAME)
    assert store.get_setting(conn, store.sync.OFFICE_TOKEN) is None
    conn.close()


@pytest.mark.parametrize("url", ["http://127.0.0.1:8080", "http://localhost:8080",
                                 "http://[::1]:8080", "https://office.example:8443"])
def test_local_http_and_any_https_are_allowed(url):
    assert syncmod.check_office_url(url + "/") == url


def test_revoked_device_is_refused_and_keeps_its_log(office_app, office_db, devices):
    a = devices("a")
    t = pair(a, office_app, office_db, "Tablet 1", "Scout A")
    save(a, "Block 3", "1.2")
    syncmod.sync(a, t)
    dev = store.list_office_devices(office_db)[0]
    r = office_app.test_client().post(f"/office/devices/{dev['id']}/revoke", json={})
    assert r.get_json() == {"revoked": 1}
    save(a, "Block 3", "1.3")
    cursor = store.get_setting(a, store.sync.PUSH_CURSOR)
    with pytest.raises(syncmod.SyncError) as e:
        syncmod.sync(a, t)
    assert e.value.status == 401 and "unpaired" in e.value.message
    assert store.get_setting(a, store.sync.PUSH_CURSOR) == cursor
    assert len(uuids(a)) == 2 and len(uuids(office_db)) == 1
    # pairing again with a new code works, and the waiting reading goes
    pair(a, office_app, office_db, "Tablet 1", "Scout A", t)
    syncmod.sync(a, t)
    assert uuids(office_db) == uuids(a)


def test_wrong_code_and_no_token(office_app, office_db, devices):
    a = devices("a")
    new_code(office_db)
    t = ClientTransport(office_app.test_client())
    with pytest.raises(syncmod.SyncError) as e:
        syncmod.pair(a, t, "AAAA-AAAA", "Tablet 1", "Scout A")
    assert e.value.status == 403 and "not valid" in e.value.message
    status, answer = t.post("/api/sync/push", {"items": {}})
    assert status == 401 and "not paired" in answer["error"]
    status, answer = t.post("/api/sync/push", {"items": {}}, "made-up-token")
    assert status == 401


def test_sync_paths_use_the_token_not_the_lan_cookie(tmp_path, devices):
    """With serve --lan every page needs a paired tablet's cookie; a device
    syncing shows its bearer token instead, and only there."""
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "lan"), "LAN": True})
    conn = store.connect(app.config["DATABASE"])
    code = new_code(conn)["code"]
    client = app.test_client()
    env = {"REMOTE_ADDR": "192.168.1.30"}
    base = "http://192.168.1.2:8080"
    a = devices("a")
    r = client.post("/api/sync/pair", base_url=base, environ_base=env,
                    json={"code": code, "name": "Tablet 1", "person": "Scout A",
                          "log_uuid": store.log_uuid(a)})
    assert r.status_code == 201
    token = r.get_json()["token"]
    r = client.post("/api/sync/pull", base_url=base, environ_base=env,
                    json={"site": "Block 3", "cursor": {}},
                    headers={"Authorization": f"Bearer {token}"})
    assert r.status_code == 200 and r.get_json()["readings"] == []
    assert client.get("/office", base_url=base, environ_base=env).status_code == 401
    conn.close()


def test_readings_record_the_person(devices):
    a = devices("a")
    store.set_setting(a, store.sync.PERSON, "Scout A")
    u1 = save(a, "Block 3", "1.2")
    u2 = save(a, "Block 3", "1.3", visited_by="Scout C")
    got = dict(a.execute("SELECT r.uuid, o.person FROM reading_origin o JOIN readings r "
                         "ON r.id = o.reading_id").fetchall())
    assert got == {u1: "Scout A", u2: "Scout C"}


def test_meters_and_calibration_checks_travel(office_app, office_db, devices):
    a = devices("a")
    t = pair(a, office_app, office_db, "Tablet 1", "Scout A")
    m = store.insert_meter(a, {"name": "Pocket 1", "units": ["dS/m"],
                               "ranges": [{"unit": "dS/m", "min": 0, "max": 20,
                                           "resolution": 0.01}], "atc": True})
    store.insert_calibration(a, {"meter_id": m["id"], "standard": "kcl_0.01", "value": 1.41,
                                 "unit": "mS/cm", "temp_c": 25, "compensated": True,
                                 "expected_uS_cm": 1413, "measured_uS_cm": 1410,
                                 "deviation_pct": -0.2, "tolerance_pct": 5, "passed": True})
    syncmod.sync(a, t)
    syncmod.sync(a, t)
    store.set_setting(a, store.sync.PUSH_CURSOR, "{}")
    syncmod.sync(a, t)
    got = store.get_meter(office_db, "Pocket 1")
    assert got is not None and got["atc"] is True
    cals = store.list_calibrations(office_db, got["id"])
    assert len(cals) == 1 and cals[0]["measured_uS_cm"] == 1410


def test_send_page_runs_a_sync_in_the_background(office_app, office_db, tmp_path):
    """The laptop's page: pair, follow, send; progress and outcome in words."""
    device = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "laptop"),
                         "SYNC_TRANSPORT": lambda url, ca: ClientTransport(
                             office_app.test_client())})
    c = device.test_client()
    conn = store.connect(device.config["DATABASE"])
    save(conn, "Block 3", "1.2")
    code = format_code(new_code(office_db)["code"])
    r = c.post("/api/send/start", json={})
    assert r.status_code == 409 and "not paired" in r.get_json()["error"]
    r = c.post("/api/send/pair", json={"url": "http://127.0.0.1:8080", "code": code,
                                       "name": "Laptop 1", "person": "Scout A"})
    assert r.status_code == 200 and r.get_json()["paired"]
    assert c.post("/api/send/follow", json={"site": "Block 3"}).get_json()["follows"] == ["Block 3"]
    r = c.post("/api/send/start", json={})
    assert r.status_code == 202
    device.extensions["fieldapp_send_job"].thread.join(30)
    st = c.get("/api/send/state").get_json()
    assert st["job"]["ok"] is True and "Sent 1 reading version" in st["job"]["outcome"]
    assert st["job"]["progress"]["batches_sent"] == 1
    assert uuids(office_db) == uuids(conn)
    conn.close()

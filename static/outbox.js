/* Outbox: readings wait in this browser's storage until the server has them.
 *
 * Every reading gets a uuid when it is saved on the device. Sending it twice
 * is harmless: the server answers the second time with the stored record.
 * A reading leaves the outbox only when the server answered 200 or 201.
 * A 4xx answer (the server refuses it) moves it to the "refused" list, still
 * in storage, with the server's message; nothing is ever dropped silently.
 * Network errors and 5xx leave it in the outbox for the next try.
 */
(function () {
  "use strict";
  var KEY = "fieldapp.outbox.v1";
  var REFUSED = "fieldapp.refused.v1";
  var ARRIVED = "fieldapp.arrived.v1";   // sent later and came back flagged
  var RETRY_MS = 5000;
  var SEND_TIMEOUT_MS = 15000;           // a laptop that accepts but never answers
  var sending = false;
  var listeners = [], sentListeners = [];
  var sentNote = null;                   // "3 readings sent", shown for a few seconds

  function load(key) {
    try { return JSON.parse(localStorage.getItem(key) || "[]"); } catch (e) { return []; }
  }
  function store(key, items) { localStorage.setItem(key, JSON.stringify(items)); }

  function newId() {
    // crypto.randomUUID needs a secure context; getRandomValues works on plain http too.
    var b = new Uint8Array(16);
    crypto.getRandomValues(b);
    b[6] = (b[6] & 0x0f) | 0x40; b[8] = (b[8] & 0x3f) | 0x80;
    var h = Array.prototype.map.call(b, function (x) { return (x + 256).toString(16).slice(1); }).join("");
    return h.slice(0, 8) + "-" + h.slice(8, 12) + "-" + h.slice(12, 16) + "-" + h.slice(16, 20) + "-" + h.slice(20);
  }

  function localIso(d) {
    // ISO 8601 with the device's UTC offset, e.g. 2026-05-14T09:30:00+02:00
    function p(n) { return (n < 10 ? "0" : "") + n; }
    var off = -d.getTimezoneOffset();
    var sign = off >= 0 ? "+" : "-";
    off = Math.abs(off);
    return d.getFullYear() + "-" + p(d.getMonth() + 1) + "-" + p(d.getDate()) + "T" +
      p(d.getHours()) + ":" + p(d.getMinutes()) + ":" + p(d.getSeconds()) +
      sign + p(Math.floor(off / 60)) + ":" + p(off % 60);
  }

  // " since 10:42" (the oldest reading still waiting; a date when not today)
  function waitingSince() {
    var oldest = null;
    load(KEY).forEach(function (x) {
      var t = Date.parse(x._queued_at || x.taken_at);
      if (!isNaN(t) && (oldest === null || t < oldest)) oldest = t;
    });
    if (oldest === null) return " to be sent";
    var d = new Date(oldest), now = new Date();
    function p(v) { return (v < 10 ? "0" : "") + v; }
    var day = d.toDateString() === now.toDateString() ? "" : d.getFullYear() + "-" + p(d.getMonth() + 1) + "-" + p(d.getDate()) + " ";
    return " since " + day + p(d.getHours()) + ":" + p(d.getMinutes());
  }

  function notify() {
    var n = load(KEY).length, r = load(REFUSED).length;
    var badge = document.getElementById("outbox-badge");
    if (badge) {
      var parts = [];
      if (n) parts.push(n + (n === 1 ? " reading waits" : " readings wait") + waitingSince());
      if (r) parts.push(r + " refused");
      var good = !parts.length && sentNote && Date.now() < sentNote.until;
      badge.textContent = good ? sentNote.text : parts.join(" · ");
      badge.hidden = !parts.length && !good;
      badge.className = "badge" + (r ? " bad" : good ? " good" : "");
    }
    listeners.forEach(function (f) { try { f(n, r); } catch (e) { /* keep going */ } });
  }

  function add(reading) {
    var items = load(KEY);
    if (!reading.uuid) reading.uuid = newId();
    if (!reading.taken_at) reading.taken_at = localIso(new Date());
    if (!reading._queued_at) reading._queued_at = localIso(new Date());   // device-only
    items.push(reading);
    store(KEY, items);   // on disk in the browser before anything is sent
    notify();
    return reading;
  }

  function has(uuid) { return load(KEY).some(function (x) { return x.uuid === uuid; }); }

  // What the server sends is the reading; keys starting with "_" are this
  // device's own notes (e.g. which flags the scout saw before saving).
  function body(item) {
    var b = {};
    Object.keys(item).forEach(function (k) { if (k.charAt(0) !== "_") b[k] = item[k]; });
    return JSON.stringify(b);
  }

  // A reading that arrives with a warning or error the scout did not see
  // before saving (saved offline, or the server found more) is kept in a list
  // the entry page shows until it is corrected or acknowledged.
  function noteArrival(item, record) {
    var flags = ((record && record.result && record.result.flags) || []).filter(function (f) {
      return f.severity === "warning" || f.severity === "error";
    });
    var seen = item._seen_flags;
    var fresh = flags.filter(function (f) { return !seen || seen.indexOf(f.code) < 0; });
    var list = load(ARRIVED);
    if (item.supersedes) list = list.filter(function (x) { return x.uuid !== item.supersedes; });
    if (fresh.length) {
      list = list.filter(function (x) { return x.uuid !== item.uuid; });
      list.push({ uuid: item.uuid, site: item.site, value: item.value, unit: item.unit,
                  taken_at: record.taken_at || item.taken_at, flags: fresh });
    }
    store(ARRIVED, list);
  }

  function remove(key, uuid) {
    store(key, load(key).filter(function (x) { return x.uuid !== uuid; }));
  }

  function flush() {
    if (sending) return Promise.resolve();
    var items = load(KEY);
    if (!items.length) { notify(); return Promise.resolve(); }
    sending = true;
    var results = [];
    function next(i) {
      if (i >= items.length) return Promise.resolve();
      var item = items[i];
      var url = item.supersedes ? "/api/readings/" + encodeURIComponent(item.supersedes) + "/correct"
                                : "/api/readings";
      var ctl = window.AbortController ? new AbortController() : null;
      var t = ctl ? setTimeout(function () { ctl.abort(); }, SEND_TIMEOUT_MS) : null;
      return fetch(url, {
        method: "POST", headers: { "Content-Type": "application/json" },
        body: body(item), credentials: "same-origin", signal: ctl ? ctl.signal : undefined
      }).finally(function () { if (t) clearTimeout(t); }).then(function (resp) {
        return resp.json().catch(function () { return {}; }).then(function (answer) {
          var body = answer;
          if (resp.status === 200 || resp.status === 201) {
            remove(KEY, item.uuid);
            noteArrival(item, body);
            results.push({ ok: true, item: item, record: body });
            return next(i + 1);
          }
          if (resp.status >= 400 && resp.status < 500 && resp.status !== 401 &&
              resp.status !== 403 && resp.status !== 408 && resp.status !== 429) {
            item.refused = { status: resp.status, error: body.error || "refused", field: body.field || null };
            var refused = load(REFUSED); refused.push(item); store(REFUSED, refused);
            remove(KEY, item.uuid);
            results.push({ ok: false, item: item });
            return next(i + 1);
          }
          var err = new Error("server " + resp.status);   // keep it, try later
          err.serverMessage = body.error || null;        // e.g. disk full, not paired
          throw err;
        });
      });
    }
    var trouble = null;
    return next(0).catch(function (e) { trouble = (e && e.serverMessage) || null; })
      .then(function () {
        sending = false; window.fieldappOutbox.lastError = trouble; notify();
        var badge = document.getElementById("outbox-badge");
        if (badge && trouble) { badge.textContent += " — " + trouble; badge.hidden = false; badge.className = "badge bad"; }
        var sent = results.filter(function (x) { return x.ok; });
        if (sent.length) {
          sentNote = { text: sent.length + (sent.length === 1 ? " reading sent" : " readings sent"),
                       until: Date.now() + 8000 };
          notify();
          setTimeout(notify, 8100);
          sentListeners.forEach(function (f) { try { f(results); } catch (e) { /* keep going */ } });
        }
        return results;
      });
  }

  window.fieldappOutbox = {
    add: add, flush: flush, newId: newId, localIso: localIso, has: has,
    sending: function () { return sending; },
    arrived: function () { return load(ARRIVED); },
    dropArrived: function (uuid) { remove(ARRIVED, uuid); notify(); },
    onSent: function (f) { sentListeners.push(f); },
    pending: function () { return load(KEY); },
    refused: function () { return load(REFUSED); },
    discardRefused: function (uuid) { remove(REFUSED, uuid); notify(); },
    takeRefused: function (uuid) {
      var item = load(REFUSED).filter(function (x) { return x.uuid === uuid; })[0];
      remove(REFUSED, uuid); notify(); return item;
    },
    onChange: function (f) { listeners.push(f); }
  };

  window.addEventListener("online", flush);
  setInterval(flush, RETRY_MS);
  document.addEventListener("DOMContentLoaded", function () { notify(); flush(); });
  // The service worker (offline reloads) is registered once the page has
  // loaded: its install fetches every page file, which would otherwise
  // compete with the first visit for a slow tablet's CPU.
  function registerWorker() {
    navigator.serviceWorker.register("/sw.js").catch(function () { /* offline reload unavailable */ });
  }
  if ("serviceWorker" in navigator && window.isSecureContext) {
    if (document.readyState === "complete") registerWorker();
    else window.addEventListener("load", registerWorker);
  }
})();

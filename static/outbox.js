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
  var RETRY_MS = 5000;
  var sending = false;
  var listeners = [];

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

  function notify() {
    var n = load(KEY).length, r = load(REFUSED).length;
    var badge = document.getElementById("outbox-badge");
    if (badge) {
      var parts = [];
      if (n) parts.push(n + (n === 1 ? " reading waits" : " readings wait") + " to be sent");
      if (r) parts.push(r + " refused");
      badge.textContent = parts.join(" · ");
      badge.hidden = !parts.length;
      badge.className = "badge" + (r ? " bad" : "");
    }
    listeners.forEach(function (f) { try { f(n, r); } catch (e) { /* keep going */ } });
  }

  function add(reading) {
    var items = load(KEY);
    if (!reading.uuid) reading.uuid = newId();
    if (!reading.taken_at) reading.taken_at = localIso(new Date());
    items.push(reading);
    store(KEY, items);   // on disk in the browser before anything is sent
    notify();
    return reading;
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
      return fetch(url, {
        method: "POST", headers: { "Content-Type": "application/json" },
        body: JSON.stringify(item), credentials: "same-origin"
      }).then(function (resp) {
        return resp.json().catch(function () { return {}; }).then(function (body) {
          if (resp.status === 200 || resp.status === 201) {
            remove(KEY, item.uuid);
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
        return results;
      });
  }

  window.fieldappOutbox = {
    add: add, flush: flush, newId: newId, localIso: localIso,
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
  if ("serviceWorker" in navigator && window.isSecureContext) {
    navigator.serviceWorker.register("/sw.js").catch(function () { /* offline reload unavailable */ });
  }
})();

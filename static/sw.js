/* Service worker: lets the entry page open and keep readings when the
 * server cannot be reached. Pages and static files: network first, the last
 * good copy when the network fails. The API is never cached: readings wait
 * in the outbox (outbox.js) until the server answers.
 * Browsers allow service workers on https and on localhost only; on a plain
 * http LAN address the outbox still keeps readings, but a reload needs the
 * server. serve --lan therefore also serves https (fieldapp/tls.py). */
"use strict";
var CACHE = "fieldapp-v3";
var SHELL = ["/", "/static/style.css", "/static/outbox.js", "/static/entry.js", "/static/site.js",
             "/static/meters.js", "/static/map.js", "/static/site_views.js",
             "/static/site_settings.js"];

self.addEventListener("install", function (ev) {
  ev.waitUntil(caches.open(CACHE).then(function (c) { return c.addAll(SHELL); })
    .then(function () { return self.skipWaiting(); }));
});

self.addEventListener("activate", function (ev) {
  ev.waitUntil(caches.keys().then(function (keys) {
    return Promise.all(keys.filter(function (k) { return k !== CACHE; })
      .map(function (k) { return caches.delete(k); }));
  }).then(function () { return self.clients.claim(); }));
});

self.addEventListener("fetch", function (ev) {
  var req = ev.request;
  var url = new URL(req.url);
  if (req.method !== "GET" || url.origin !== self.location.origin ||
      url.pathname.indexOf("/api/") === 0 || url.pathname.slice(-4) === ".csv") return;
  ev.respondWith(fetch(req).then(function (resp) {
    if (resp.ok) {
      var copy = resp.clone();
      caches.open(CACHE).then(function (c) { c.put(req, copy); });
    }
    return resp;
  }).catch(function () {
    return caches.match(req, { ignoreSearch: url.pathname === "/" }).then(function (hit) {
      return hit || new Response("<!doctype html><meta name=viewport content='width=device-width'>" +
        "<p style='font:18px sans-serif;padding:1rem'>No connection to the fieldapp server, and this " +
        "page was not opened before. Go back to <a href='/'>New reading</a>: it works offline.</p>",
        { status: 503, headers: { "Content-Type": "text/html; charset=utf-8" } });
    });
  }));
});

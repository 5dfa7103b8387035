/* Pairing: a tablet trades the laptop's code for a session cookie; on the
 * laptop, codes are renewed or revoked and devices unpaired. A code in the
 * address (#ABCD-EFGH, from the QR code) is filled in and sent at once, then
 * removed from the address bar. */
(function () {
  "use strict";
  function $(id) { return document.getElementById(id); }

  function post(url, body) {
    return fetch(url, {
      method: "POST", headers: { "Content-Type": "application/json" },
      body: JSON.stringify(body || {}), credentials: "same-origin"
    }).then(function (r) {
      return r.json().catch(function () { return {}; })
        .then(function (b) { return { status: r.status, body: b }; });
    });
  }

  // Where to go once paired: an address of this server only. Parsed as a URL
  // the way the browser will follow it (tabs and line breaks dropped, "\\"
  // read as "/"), never judged by its characters.
  function safeNext(p) {
    var here = window.location.origin;
    try {
      var u = new URL(typeof p === "string" && p ? p : "/", here);
      if (u.origin === here && (u.protocol === "http:" || u.protocol === "https:")) return u.href;
    } catch (e) { /* not an address: go home */ }
    return here + "/";
  }

  var form = $("pair-form");
  if (form) {
    var fromQr = "";
    try { fromQr = decodeURIComponent(window.location.hash.slice(1)); } catch (e) { fromQr = ""; }
    if (fromQr) {
      $("code").value = fromQr.slice(0, 16);
      history.replaceState(null, "", window.location.pathname + window.location.search);
    }
    var send = function () {
      $("err-code").textContent = ""; $("err-form").textContent = "";
      var code = $("code").value.trim();
      if (!code) { $("err-code").textContent = "Type the code the laptop shows."; $("code").focus(); return; }
      $("pair").disabled = true;
      post("/pair", { code: code, name: $("name").value.trim() }).then(function (res) {
        $("pair").disabled = false;
        if (res.status === 200 && res.body.ok) {
          $("paired-msg").textContent = "Paired as " + res.body.device.label + ". Opening the log…";
          window.location.replace(safeNext(form.getAttribute("data-next")));
          return;
        }
        var el = res.body.field === "code" ? $("err-code") : $("err-form");
        el.textContent = res.body.error || "Pairing failed.";
        $("code").focus();
      }).catch(function () {
        $("pair").disabled = false;
        $("err-form").textContent = "No connection to the laptop. Check that this device is on the laptop's network.";
      });
    };
    form.addEventListener("submit", function (ev) { ev.preventDefault(); send(); });
    if (fromQr) send(); else $("code").focus();
  }

  if ($("forget")) {
    $("forget").addEventListener("click", function () {
      if (!window.confirm("Unpair this device? It will need the laptop's code again.")) return;
      post("/pair/forget").then(function () { window.location.reload(); })
        .catch(function () { $("err-form").textContent = "No connection to the laptop."; });
    });
  }

  function adminAction(url, question) {
    if (question && !window.confirm(question)) return;
    post(url).then(function (res) {
      if (res.status >= 200 && res.status < 300) window.location.reload();
      else $("err-admin").textContent = res.body.error || "Not done.";
    }).catch(function () { $("err-admin").textContent = "No connection to the server."; });
  }

  if ($("admin")) {
    if ($("new-code")) $("new-code").addEventListener("click", function () {
      adminAction("/pair/codes", $("pair-code") ? "Make a new code? The current one stops working." : null);
    });
    if ($("revoke-code")) $("revoke-code").addEventListener("click", function () {
      adminAction("/pair/codes/revoke", "Revoke the code? No new tablet can pair until you make a new one.");
    });
    document.querySelectorAll(".unpair").forEach(function (b) {
      b.addEventListener("click", function () {
        adminAction("/pair/devices/" + encodeURIComponent(b.getAttribute("data-id")) + "/revoke",
                    "Unpair this device? It loses access until it pairs again.");
      });
    });
    if ($("unpair-all")) $("unpair-all").addEventListener("click", function () {
      adminAction("/pair/devices/revoke", "Unpair every device?");
    });
    // Show a tablet as soon as it pairs.
    var known = $("devices") ? $("devices").getAttribute("data-count") : "0";
    setInterval(function () {
      fetch("/pair/state", { credentials: "same-origin" }).then(function (r) { return r.json(); })
        .then(function (st) { if (String(st.devices.length) !== known) window.location.reload(); })
        .catch(function () { /* server away: try again */ });
    }, 5000);
  }
})();

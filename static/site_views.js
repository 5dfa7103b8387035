/* Site views: the user's target ranges (site page) and the print button
 * (visit report). An external file because the pages allow no inline script. */
(function () {
  "use strict";
  var printBtn = document.getElementById("print-btn");
  if (printBtn) printBtn.addEventListener("click", function () { window.print(); });

  var form = document.getElementById("target-form");
  if (!form) return;
  var err = document.getElementById("err-target");
  function send(method, url, body) {
    return fetch(url, {
      method: method, headers: { "Content-Type": "application/json" }, credentials: "same-origin",
      body: JSON.stringify(body || {})
    }).then(function (r) { return r.json().then(function (b) { return { ok: r.ok, body: b }; }); });
  }
  form.addEventListener("submit", function (ev) {
    ev.preventDefault();
    err.textContent = "";
    form.querySelectorAll(".invalid").forEach(function (f) { f.classList.remove("invalid"); });
    var body = {};
    new FormData(form).forEach(function (v, k) { body[k] = v; });
    send("POST", "/api/targets", body).then(function (res) {
      if (res.ok) { window.location.hash = "targets"; window.location.reload(); return; }
      err.textContent = res.body.error || "Could not save the target.";
      var f = res.body.field && form.querySelector("[name='" + res.body.field + "']");
      if (f) { f.classList.add("invalid"); f.focus(); }   // what was typed stays in the form
    }).catch(function () {
      err.textContent = "No connection to the server; the target was not saved. Try again.";
    });
  });
  document.querySelectorAll(".target-del").forEach(function (b) {
    b.addEventListener("click", function () {
      send("DELETE", "/api/targets/" + encodeURIComponent(b.getAttribute("data-id")))
        .then(function (res) {
          if (res.ok) window.location.reload();
          else err.textContent = res.body.error || "Could not remove the target.";
        })
        .catch(function () { err.textContent = "No connection to the server; nothing was removed."; });
    });
  });
})();

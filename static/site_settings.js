/* Site settings form: set up a new site (POST /api/sites) or change one
 * (PATCH /api/sites/<id>). A refused value keeps everything typed, marks the
 * field, scrolls it into view and keeps the message until that field changes. */
(function () {
  "use strict";
  var form = document.getElementById("site-form");
  if (!form) return;
  var FIELDS = ["name", "kind", "crop", "texture", "sp_pct", "latitude", "longitude", "notes"];
  function $(id) { return document.getElementById(id); }
  var status = $("s-status");

  function clearField(name) {
    var el = $("serr-" + name); if (el) el.textContent = "";
    var input = $("s-" + name); if (input) { input.classList.remove("invalid"); input.removeAttribute("aria-invalid"); }
  }
  FIELDS.forEach(function (f) {
    var input = $("s-" + f);
    if (!input) return;
    ["input", "change"].forEach(function (ev) {
      input.addEventListener(ev, function () { clearField(f); $("serr-form").textContent = ""; status.textContent = ""; });
    });
  });

  function body() {
    var b = {};
    FIELDS.forEach(function (f) {
      var v = $("s-" + f).value;
      if (f === "notes") { b[f] = v; return; }
      v = v.trim();
      b[f] = v === "" ? null : v;
    });
    return b;
  }

  function showError(field, message) {
    var input = $("s-" + field), el = $("serr-" + field);
    if (!el || !input) { $("serr-form").textContent = message; $("serr-form").scrollIntoView({ block: "center" }); return; }
    el.textContent = message;
    input.classList.add("invalid");
    input.setAttribute("aria-invalid", "true");
    input.scrollIntoView({ block: "center" });
    input.focus({ preventScroll: true });
  }

  var busy = false;
  form.addEventListener("submit", function (ev) {
    ev.preventDefault();
    if (busy) return;
    FIELDS.forEach(clearField);
    $("serr-form").textContent = ""; status.textContent = "";
    var edit = form.dataset.mode === "edit";
    var url = edit ? "/api/sites/" + encodeURIComponent(form.dataset.id) : "/api/sites";
    busy = true; $("s-save").disabled = true;
    fetch(url, { method: edit ? "PATCH" : "POST", headers: { "Content-Type": "application/json" },
                 credentials: "same-origin", body: JSON.stringify(body()) })
      .then(function (r) { return r.json().then(function (b) { return { status: r.status, body: b }; }); })
      .then(function (res) {
        busy = false; $("s-save").disabled = false;
        if (res.status === 200 || res.status === 201) {
          status.textContent = res.body.change_no === null ? "Nothing changed." : "Saved.";
          if (res.body.change_no === null) return;
          window.location.assign("/sites/" + res.body.id + "?saved=1");
          return;
        }
        showError(res.body.field || "form", res.body.error || "Not accepted.");
      })
      .catch(function () {
        busy = false; $("s-save").disabled = false;
        showError("form", "No connection to the laptop; nothing was saved. Your typing is kept: try again.");
      });
  });
})();

/* Meters page: add a meter profile (from a generic type or custom) and record
 * calibration checks. Messages appear beside the field; typed values stay. */
(function () {
  "use strict";
  function $(id) { return document.getElementById(id); }
  var presets = JSON.parse($("presets").textContent);

  function post(url, body) {
    return fetch(url, { method: "POST", headers: { "Content-Type": "application/json" },
                        body: JSON.stringify(body), credentials: "same-origin" })
      .then(function (r) { return r.json().then(function (b) { return { status: r.status, body: b }; }); });
  }
  function clear(prefix) {
    document.querySelectorAll("[id^='" + prefix + "err-']").forEach(function (e) { e.textContent = ""; });
  }
  function val(id) { var v = $(id).value.trim(); return v === "" ? null : v; }

  $("m-preset").addEventListener("change", function () {
    var p = presets[this.value];
    $("m-preset-desc").textContent = p ? p["class"].parts.join(", ") + ". " + p["class"].note : "";
    if (!p) return;
    var r = p.ranges[p.ranges.length - 1];
    $("m-unit").value = r.unit; $("m-min").value = p.ranges[0].min; $("m-max").value = r.max;
    $("m-res").value = p.ranges[0].resolution || "";
    $("m-atc").checked = p.atc;
    $("m-atc_min_c").value = p.atc_min_c === null ? "" : p.atc_min_c;
    $("m-atc_max_c").value = p.atc_max_c === null ? "" : p.atc_max_c;
    $("m-accuracy_pct").value = p.accuracy_pct === null ? "" : p.accuracy_pct;
  });

  $("meter-form").addEventListener("submit", function (ev) {
    ev.preventDefault(); clear("m");
    var p = presets[$("m-preset").value];
    var body;
    var custom = { name: val("m-name"), atc: $("m-atc").checked, atc_min_c: val("m-atc_min_c"),
                   atc_max_c: val("m-atc_max_c"), accuracy_pct: val("m-accuracy_pct") };
    if (p && $("m-max").value == p.ranges[p.ranges.length - 1].max) {
      body = Object.assign({}, p, custom);    // all ranges of a multi-range type
    } else {
      body = Object.assign(custom, { units: [$("m-unit").value],
        ranges: [{ min: val("m-min") || "0", max: val("m-max"), resolution: val("m-res"), unit: $("m-unit").value }] });
    }
    post("/api/meters", body).then(function (res) {
      if (res.status === 201) { window.location.reload(); return; }
      var el = $("merr-" + (res.body.field || "form")) || $("merr-form");
      el.textContent = res.body.error || "Not accepted.";
    }).catch(function () { $("merr-form").textContent = "No connection to the server."; });
  });

  if (!$("check-form")) return;   // no meter yet: only the "add" form is shown
  $("c-standard").addEventListener("change", function () { $("c-user").hidden = this.value !== "user"; });

  $("check-form").addEventListener("submit", function (ev) {
    ev.preventDefault(); clear("c");
    var out = $("check-result"); out.textContent = ""; out.className = "";
    var body = { meter: $("c-meter").value, standard: $("c-standard").value, value: val("c-value"),
                 unit: $("c-unit").value, temp_c: val("c-temp_c"), compensated: $("c-compensated").checked,
                 tolerance_pct: val("c-tolerance_pct"), standard_uS_cm: val("c-standard_uS_cm") };
    post("/api/calibrations", body).then(function (res) {
      if (res.status !== 201) {
        var el = $("cerr-" + (res.body.field || "form")) || $("cerr-form");
        el.textContent = res.body.error || "Not accepted."; return;
      }
      var b = res.body;
      out.className = b.passed ? "ok" : "err";
      out.textContent = (b.passed ? "Passed: " : "FAILED: ") + "expected " + b.expected_uS_cm.toFixed(0) +
        " µS/cm, meter shows " + b.measured_uS_cm.toFixed(0) + " µS/cm (" + (b.deviation_pct > 0 ? "+" : "") +
        b.deviation_pct.toFixed(1) + " %, tolerance ±" + b.tolerance_pct + " %)." +
        (b.passed ? "" : " Clean the probe, recalibrate as the manual says, and check again.");
    }).catch(function () { $("cerr-form").textContent = "No connection to the server."; });
  });
})();

/* Entry page: live preview while typing, one-tap save through the outbox. */
(function () {
  "use strict";
  var form = document.getElementById("reading-form");
  var meta = JSON.parse(document.getElementById("meta").textContent);
  var preview = document.getElementById("preview");
  var saved = document.getElementById("saved");
  var FIELDS = ["site", "sample", "value", "unit", "tds_factor", "ratio", "sp", "texture",
                "depth_cm", "temp_c", "meter", "replicate_group", "crop", "theta_g_pct",
                "matric_MPa", "note", "visited_by"];
  var KEEP = ["site", "sample", "unit", "meter", "tds_factor", "ratio", "texture", "sp",
              "temp_c", "compensated", "crop", "visited_by"];
  var TDS_UNITS = ["ppm", "mg/L", "ppt", "g/L"];
  var LAST = "fieldapp.form.v1";
  var timer = null, seq = 0;
  var correcting = null;

  function $(id) { return document.getElementById(id); }
  function kind(key) { return meta.samples.filter(function (s) { return s.key === key; })[0] || {}; }

  function payload() {
    var d = {};
    FIELDS.forEach(function (f) { var v = $(f).value.trim(); if (v !== "") d[f] = v; });
    d.compensated = $("compensated").checked;
    var k = kind(d.sample);
    if (!k.takes_ratio) delete d.ratio;
    if (!k.is_soil) { delete d.sp; delete d.texture; delete d.depth_cm; delete d.theta_g_pct; delete d.matric_MPa; }
    if (TDS_UNITS.indexOf(d.unit) < 0) delete d.tds_factor;
    return d;
  }

  function showFor() {
    var k = kind($("sample").value);
    document.querySelectorAll("[data-show]").forEach(function (el) {
      var what = el.getAttribute("data-show");
      el.hidden = !(what === "ratio" ? k.takes_ratio : what === "soil" ? k.is_soil :
                    what === "tds" ? TDS_UNITS.indexOf($("unit").value) >= 0 : true);
    });
    if (k.takes_ratio && !$("ratio").value && k.default_ratio) $("ratio").value = "1:" + k.default_ratio;
  }

  function clearErrors() {
    document.querySelectorAll(".err").forEach(function (e) { e.textContent = ""; });
    document.querySelectorAll(".invalid").forEach(function (e) { e.classList.remove("invalid"); });
  }

  function showError(field, msg) {
    var el = $("err-" + field) || $("err-form");
    el.textContent = msg;
    if ($(field)) $(field).classList.add("invalid");
  }

  function fmt(x, digits) {
    // A few significant digits in plain notation (never 1.9e+3).
    if (x === null || x === undefined) return "—";
    x = Number(x);
    var d = digits || 3;
    if (x === 0) return "0";
    var mag = Math.floor(Math.log10(Math.abs(x)));
    var decimals = Math.max(0, d - 1 - mag);
    return x.toFixed(Math.min(decimals, 8)).replace(/(\.\d*?)0+$/, "$1").replace(/\.$/, "");
  }

  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) e.className = cls;
    if (text !== undefined) e.textContent = text;
    return e;
  }

  function line(dl, label, value, note) {
    dl.appendChild(el("dt", "", label));
    var dd = el("dd", "", value);
    if (note) dd.appendChild(el("span", "muted", " " + note));
    dl.appendChild(dd);
  }

  function render(r) {
    preview.textContent = "";
    renderFlags(r.flags);
    var dl = el("dl", "results");
    line(dl, "EC at 25 °C", fmt(r.ec25_dS_m, 3) + " dS/m",
         "(" + fmt(r.ec25_uS_cm, 4) + " µS/cm" +
         (r.compensation_factor && Math.abs(r.compensation_factor - 1) > 0.005 ?
           ", ×" + fmt(r.compensation_factor, 3) + " for temperature" : "") + ")");
    if (r.ece_dS_m !== null) {
      line(dl, "ECe", fmt(r.ece_dS_m, 3) + " dS/m",
           r.ece_method + (r.ece_uncertainty_pct ? " · about ±" + fmt(r.ece_uncertainty_pct, 2) + " %" : ""));
    }
    if (r.soil_class) line(dl, "Soil", r.soil_class.replace(/_/g, " "));
    if (r.water_hazard) line(dl, "Water hazard", r.water_hazard.replace(/_/g, " "), "(FAO 29)");
    if (r.psi_s_MPa !== null) line(dl, "Solute potential", fmt(r.psi_s_MPa, 3) + " MPa", r.psi_s_method);
    if (r.soil_solution) {
      line(dl, "At field capacity", fmt(r.soil_solution.psi_s_fc_MPa, 3) + " MPa",
           "(soil solution about " + fmt(r.soil_solution.ec_fc_dS_m, 3) + " dS/m)");
      if (r.soil_solution.psi_total_MPa !== null) {
        line(dl, "Total water potential", fmt(r.soil_solution.psi_total_MPa, 3) + " MPa",
             fmt(r.soil_solution.margin_to_pwp_MPa, 2) + " MPa above wilting point");
      }
    }
    if (r.crop) {
      if (r.relative_yield_pct !== undefined && r.relative_yield_pct !== null)
        line(dl, "Expected yield", fmt(r.relative_yield_pct, 3) + " %", r.crop.name + ", Maas-Hoffman");
      if (r.leaching_requirement !== undefined)
        line(dl, "Leaching requirement", r.leaching_requirement === null ? "not reachable" :
             Math.round(r.leaching_requirement * 100) + " % of water applied", r.crop.name);
    }
    if (r.unit_note) line(dl, "Unit", r.unit_canonical, r.unit_note);
    preview.appendChild(dl);
    preview.appendChild(el("p", "caution", r.cautions[0] + " " + r.cautions[1]));
  }

  var ORDER = { error: 0, warning: 1, info: 2 };
  function renderFlags(flags) {
    if (flags.length) {
      var ul = el("ul", "flags");
      flags.slice().sort(function (a, b) { return ORDER[a.severity] - ORDER[b.severity]; }).forEach(function (f) {
        var li = el("li", "flag " + f.severity);
        li.setAttribute("data-code", f.code);
        li.appendChild(el("strong", "", f.severity === "info" ? "Note" : f.severity === "warning" ? "Check" : "Problem"));
        li.appendChild(document.createTextNode(" " + f.message + " "));
        if (f.action) li.appendChild(el("span", "action", f.action));
        if (f.data && f.data.suggested_unit) {
          var b = el("button", "fix", "Use " + f.data.suggested_unit);
          b.type = "button";
          b.setAttribute("data-fix-unit", f.data.suggested_unit);
          b.addEventListener("click", function () { setUnit(f.data.suggested_unit); });
          li.appendChild(b);
        }
        ul.appendChild(li);
      });
      preview.appendChild(ul);
    }
  }

  function setUnit(u) {
    var sel = $("unit");
    if (!Array.prototype.some.call(sel.options, function (o) { return o.value === u; })) {
      var o = document.createElement("option"); o.value = u; o.textContent = u; sel.appendChild(o);
    }
    sel.value = u;
    showFor();
    schedule();
  }

  function update() {
    var d = payload();
    clearErrors();
    if (!d.value) {
      preview.innerHTML = '<p class="muted">Type a reading to see EC at 25 °C, ECe and solute potential.</p>';
      return;
    }
    var my = ++seq;
    fetch("/api/preview", { method: "POST", headers: { "Content-Type": "application/json" },
                            body: JSON.stringify(d), credentials: "same-origin" })
      .then(function (resp) {
        return resp.json().then(function (body) { return { status: resp.status, body: body }; });
      })
      .then(function (res) {
        if (my !== seq) return;  // an older answer arriving late
        if (res.status === 200) render(res.body);
        else { preview.textContent = ""; showError(res.body.field || "form", res.body.error || "Not accepted."); }
      })
      .catch(function () {
        if (my !== seq) return;
        preview.innerHTML = "";
        preview.appendChild(el("p", "offline", "No connection to the server: no preview now. " +
          "Save still works; the reading waits on this device and is sent when the server is back."));
      });
  }

  function schedule() { clearTimeout(timer); timer = setTimeout(update, 250); }

  function remember() {
    var keep = {};
    KEEP.forEach(function (f) { keep[f] = f === "compensated" ? $(f).checked : $(f).value; });
    localStorage.setItem(LAST, JSON.stringify(keep));
  }

  function restore() {
    var keep;
    try { keep = JSON.parse(localStorage.getItem(LAST) || "{}"); } catch (e) { keep = {}; }
    KEEP.forEach(function (f) {
      if (keep[f] === undefined) return;
      if (f === "compensated") $(f).checked = !!keep[f];
      else if (f === "unit") setUnitQuiet(keep[f]);
      else $(f).value = keep[f];
    });
  }
  function setUnitQuiet(u) {
    var sel = $("unit");
    if (u && !Array.prototype.some.call(sel.options, function (o) { return o.value === u; })) {
      var o = document.createElement("option"); o.value = u; o.textContent = u; sel.appendChild(o);
    }
    if (u) sel.value = u;
  }

  form.addEventListener("input", schedule);
  form.addEventListener("change", function () { showFor(); schedule(); });

  form.addEventListener("submit", function (ev) {
    ev.preventDefault();
    clearErrors();
    var d = payload();
    if (!d.site) { showError("site", "Type a site name, e.g. Block 3."); $("site").focus(); return; }
    if (!d.value) { showError("value", "Type the number the meter shows."); $("value").focus(); return; }
    if (correcting) d.supersedes = correcting;
    var item = window.fieldappOutbox.add(d);
    remember();
    saved.textContent = "Saved on this device…";
    window.fieldappOutbox.flush().then(function (results) {
      var mine = (results || []).filter(function (x) { return x.item.uuid === item.uuid; })[0];
      var waiting = window.fieldappOutbox.pending().some(function (x) { return x.uuid === item.uuid; });
      if (mine && mine.ok) {
        saved.textContent = "Saved to the log: " + d.value + " " + d.unit + " at " + d.site + ".";
        if (correcting) { window.location = "/sites/" + mine.record.site_id; return; }
      } else if (mine && !mine.ok) {
        var refused = window.fieldappOutbox.takeRefused(item.uuid);
        saved.textContent = "";
        showError(refused.refused.field || "form", refused.refused.error);
        return;  // the form still shows what was typed; fix and save again
      } else if (waiting) {
        saved.textContent = window.fieldappOutbox.lastError
          ? "Not in the log yet: " + window.fieldappOutbox.lastError + " It waits on this device."
          : "No connection: the reading waits on this device and will be sent.";
      }
      $("value").value = ""; $("note").value = ""; $("replicate_group").value = "";
      correcting = null; $("correcting").hidden = true; $("form-title").textContent = "New reading";
      preview.innerHTML = '<p class="muted">Type the next reading.</p>';
      $("value").focus();
      refreshSites(d.site);
    });
  });

  function refreshSites(name) {
    var list = $("site-list");
    if (!Array.prototype.some.call(list.options, function (o) { return o.value === name; })) {
      var o = document.createElement("option"); o.value = name; list.appendChild(o);
    }
  }

  function renderRefused() {
    var items = window.fieldappOutbox.refused();
    var box = $("rejected"), ul = $("rejected-list");
    box.hidden = !items.length;
    ul.textContent = "";
    items.forEach(function (it) {
      var li = el("li", "", it.site + ": " + it.value + " " + it.unit + " — " + it.refused.error + " ");
      var edit = el("button", "", "Fix"); edit.type = "button";
      edit.addEventListener("click", function () {
        var x = window.fieldappOutbox.takeRefused(it.uuid);
        FIELDS.forEach(function (f) { if (x[f] !== undefined) { if (f === "unit") setUnitQuiet(x[f]); else $(f).value = x[f]; } });
        $("compensated").checked = !!x.compensated;
        showFor(); update();
        if (x.refused.field) showError(x.refused.field, x.refused.error);
      });
      var drop = el("button", "", "Discard"); drop.type = "button";
      drop.addEventListener("click", function () {
        if (confirm("Discard this reading for good?")) window.fieldappOutbox.discardRefused(it.uuid);
      });
      li.appendChild(edit); li.appendChild(drop);
      ul.appendChild(li);
    });
  }
  window.fieldappOutbox.onChange(renderRefused);

  function startCorrection(uuid) {
    fetch("/api/readings/" + encodeURIComponent(uuid)).then(function (r) { return r.json(); })
      .then(function (rec) {
        if (!rec.uuid) return;
        correcting = rec.uuid;
        $("form-title").textContent = "Correct a reading";
        $("correcting").hidden = false;
        $("correcting").textContent = "You are correcting " + rec.value + " " + rec.unit + " at " +
          rec.site + " (" + rec.taken_at + "). The old version stays in the log, marked corrected.";
        $("site").value = rec.site; $("site").readOnly = true;
        $("sample").value = rec.sample; setUnitQuiet(rec.unit);
        ["value", "ratio", "texture", "depth_cm", "temp_c", "meter", "replicate_group", "note",
         "theta_g_pct", "matric_MPa", "tds_factor"].forEach(function (f) {
          if (rec[f] !== null && rec[f] !== undefined) $(f).value = rec[f];
        });
        if (rec.sp_pct !== null) $("sp").value = rec.sp_pct;
        $("compensated").checked = rec.compensated;
        showFor(); update();
      });
  }

  restore();
  var params = new URLSearchParams(window.location.search);
  if (params.get("site")) $("site").value = params.get("site");
  showFor();
  renderRefused();
  if (params.get("correct")) startCorrection(params.get("correct"));
})();

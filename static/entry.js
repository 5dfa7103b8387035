/* Entry page: live preview while typing, one-tap save through the outbox.
 *
 * Promises this page keeps to the scout:
 * - A refused Save keeps every typed value; the message stays beside its
 *   field (scrolled into view, focused) until that field changes.
 * - One form, one uuid: the reading gets its uuid at the first tap and keeps
 *   it until the form is cleared, so taps, timeouts and resends store it once.
 *   With no answer within ANSWER_MS the reading stays queued on this device
 *   (once) and the form clears for the next one.
 * - An error-level flag needs one deliberate "Save anyway"; the log keeps a
 *   note that the scout saw it.
 * - Values carried over from the last reading are marked as carried; the
 *   temperature does not carry across a change of site or after 30 minutes.
 */
(function () {
  "use strict";
  var form = document.getElementById("reading-form");
  var meta = JSON.parse(document.getElementById("meta").textContent);
  var siteLasts = JSON.parse(document.getElementById("site-lasts").textContent);
  var preview = document.getElementById("preview");
  var saved = document.getElementById("saved");
  var box = window.fieldappOutbox;
  var FIELDS = ["site", "sample", "value", "unit", "tds_factor", "ratio", "sp", "texture",
                "depth_cm", "temp_c", "meter", "replicate_group", "crop", "theta_g_pct",
                "matric_MPa", "note", "visited_by", "salt_type"];
  var KEEP = ["site", "sample", "unit", "meter", "tds_factor", "ratio", "texture", "sp",
              "temp_c", "compensated", "crop", "visited_by"];
  var TDS_UNITS = ["ppm", "mg/L", "ppt", "g/L"];
  var WATER_KINDS = ["water", "drain"];
  var KIND_SAMPLE = { water_source: "water", drain: "drain" };   // the one sample such a site gives
  var LAST = "fieldapp.form.v2";
  var TEMP_CARRY_MS = 30 * 60 * 1000;   // a sample's temperature is stale after 30 min
  var ANSWER_MS = 4000;                 // no answer by then: the reading waits on the device
  var PREVIEW_WAIT_MS = 3000;
  var timer = null, seq = 0;
  var correcting = null;                // the record being corrected
  var formUuid = null;                  // this form's reading, from the first tap
  var awaiting = null;                  // uuid whose save answer the page waits for
  var lastPreview = null;               // {key, result} of the newest preview answer
  var errors = {};                      // field -> {msg, from: "save" | "preview"}
  var carried = {};                     // field -> why it is marked carried
  var touched = {};                     // fields the scout set for this reading

  function $(id) { return document.getElementById(id); }
  function kind(key) { return meta.samples.filter(function (s) { return s.key === key; })[0] || {}; }
  function siteInfo(name) {
    var n = (name || "").trim().toLowerCase();
    return siteLasts.filter(function (s) { return s.name.toLowerCase() === n; })[0] || null;
  }

  function payload() {
    var d = {};
    FIELDS.forEach(function (f) { var v = $(f).value.trim(); if (v !== "") d[f] = v; });
    d.compensated = $("compensated").checked;
    var k = kind(d.sample);
    if (!k.takes_ratio) delete d.ratio;
    if (!k.is_soil) { delete d.sp; delete d.texture; delete d.depth_cm; delete d.theta_g_pct; delete d.matric_MPa; }
    if (TDS_UNITS.indexOf(d.unit) < 0) delete d.tds_factor;
    if (WATER_KINDS.indexOf(d.sample) < 0) delete d.salt_type;
    var t = takenAt();
    if (t) d.taken_at = t;
    return d;
  }
  function keyOf(d) {
    var c = {};
    Object.keys(d).sort().forEach(function (k) { if (k !== "uuid" && k.charAt(0) !== "_") c[k] = d[k]; });
    return JSON.stringify(c);
  }

  // ---- the time the sample was taken
  function wallTime(iso) { return iso ? String(iso).slice(0, 16) : ""; }
  function offsetOf(iso) { var m = /([+-]\d\d:\d\d|Z)$/.exec(iso || ""); return m ? m[1] : null; }
  function takenAt() {
    if (correcting) {
      var v = $("taken_at").value;
      if (!v || v === wallTime(correcting.taken_at)) return correcting.taken_at;   // unchanged
      return v + ":00" + (offsetOf(correcting.taken_at) || deviceOffset());
    }
    var later = $("taken_at_more").value;
    return later ? later + ":00" + deviceOffset() : null;
  }
  function deviceOffset() { return box.localIso(new Date()).slice(-6); }

  function showFor() {
    var k = kind($("sample").value);
    document.querySelectorAll("[data-show]").forEach(function (el) {
      var what = el.getAttribute("data-show");
      el.hidden = !(what === "ratio" ? k.takes_ratio : what === "soil" ? k.is_soil :
                    what === "water" ? WATER_KINDS.indexOf(k.key) >= 0 :
                    what === "tds" ? TDS_UNITS.indexOf($("unit").value) >= 0 : true);
    });
    if (k.takes_ratio && !$("ratio").value && k.default_ratio) $("ratio").value = "1:" + k.default_ratio;
  }

  // ---- messages beside fields: they stay until their field changes
  function setError(field, msg, from) {
    if (!$("err-" + field)) field = "form";
    errors[field] = { msg: msg, from: from };
    paintErrors();
  }
  function dropError(field) { delete errors[field]; paintErrors(); }
  function dropPreviewErrors() {
    Object.keys(errors).forEach(function (f) { if (errors[f].from === "preview") delete errors[f]; });
  }
  function paintErrors() {
    document.querySelectorAll(".err").forEach(function (e) { e.textContent = ""; });
    document.querySelectorAll(".invalid").forEach(function (e) { e.classList.remove("invalid"); });
    Object.keys(errors).forEach(function (f) {
      $("err-" + f).textContent = errors[f].msg;
      if ($(f)) { $(f).classList.add("invalid"); $(f).setAttribute("aria-invalid", "true"); }
    });
    document.querySelectorAll("[aria-invalid]").forEach(function (e) {
      if (!errors[e.id]) e.removeAttribute("aria-invalid");
    });
  }
  function goTo(field) {
    var target = $(field) || $("err-" + field) || $("err-form");
    var more = target.closest ? target.closest("details") : null;
    if (more) more.open = true;
    var holder = target.closest ? target.closest("[hidden]") : null;
    if (holder) holder.hidden = false;
    target.scrollIntoView({ block: "center" });
    if (target.focus) target.focus({ preventScroll: true });
  }
  function refuse(field, msg) {
    setError(field, msg, "save");
    status("Not saved: " + msg, "bad");
    goTo(errors[field] ? field : "form");
  }
  function status(text, cls) {
    saved.textContent = text;
    saved.className = cls === "bad" ? "bad" : cls === "wait" ? "wait" : "ok";
  }

  // ---- numbers and results
  function fmt(x, digits) {
    // A few significant digits in plain notation (never 1.9e+3).
    if (x === null || x === undefined) return null;
    x = Number(x);
    var d = digits || 3;
    if (x === 0) return "0";
    var mag = Math.floor(Math.log10(Math.abs(x)));
    var decimals = Math.max(0, d - 1 - mag);
    return x.toFixed(Math.min(decimals, 8)).replace(/(\.\d*?)0+$/, "$1").replace(/\.$/, "");
  }
  function withUnit(x, digits, unit, why) {
    var s = fmt(x, digits);
    return s === null ? "not computed" + (why ? ": " + why : "") : s + " " + unit;
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

  function words(s) { return String(s || "").replace(/_/g, " "); }

  function render(r) {
    preview.textContent = "";
    renderFlags(r.flags, preview);
    var dl = el("dl", "results");
    line(dl, "EC at 25 °C", withUnit(r.ec25_dS_m, 3, "dS/m"),
         "(" + withUnit(r.ec25_uS_cm, 4, "µS/cm") +
         (r.compensation_factor && Math.abs(r.compensation_factor - 1) > 0.005 ?
           ", ×" + fmt(r.compensation_factor, 3) + " for temperature" : "") + ")" +
         (r.temp_method_label ? " " + r.temp_method_label : ""));
    if (r.ece_dS_m !== null) {
      line(dl, "ECe", withUnit(r.ece_dS_m, 3, "dS/m"),
           (r.ece_method_label || "") + (r.ece_uncertainty_pct ? " · about ±" + fmt(r.ece_uncertainty_pct, 2) + " %" : ""));
      if (r.ece_note) dl.lastChild.appendChild(el("span", "muted small-print", r.ece_note));
    }
    if (r.tds) {
      if (r.tds.meter) line(dl, "TDS, meter", fmt(r.tds.meter.value, 4) + " " + r.tds.meter.unit, r.tds.meter.label);
      if (r.tds.estimate_mg_L !== null && r.tds.estimate_mg_L !== undefined)
        line(dl, "TDS, estimate", withUnit(r.tds.estimate_mg_L, 3, "mg/L"), r.tds.estimate_label);
    }
    if (r.soil_class) line(dl, "Soil", words(r.soil_class));
    if (r.water_hazard) line(dl, "Water hazard", words(r.water_hazard), "(FAO 29)");
    if (r.psi_s_MPa !== null) line(dl, "Solute potential", withUnit(r.psi_s_MPa, 3, "MPa"), r.psi_s_method_label);
    if (r.psi_s_by_method && r.psi_s_by_method.seawater_pss78 !== null && r.psi_s_by_method.seawater_pss78 !== undefined &&
        r.psi_s_method !== "nacl_pitzer" && r.psi_s_by_method.nacl_pitzer !== null)
      line(dl, "… as sodium chloride", withUnit(r.psi_s_by_method.nacl_pitzer, 3, "MPa"), "for comparison");
    if (r.soil_solution) {
      line(dl, "At field capacity",
           withUnit(r.soil_solution.psi_s_fc_MPa, 3, "MPa", "needs the soil's saturation % or texture"),
           r.soil_solution.ec_fc_dS_m !== null ? "(soil solution about " + withUnit(r.soil_solution.ec_fc_dS_m, 3, "dS/m") + ")" : "");
      if (r.soil_solution.psi_total_MPa !== null) {
        var margin = fmt(r.soil_solution.margin_to_pwp_MPa, 2);
        line(dl, "Total water potential", withUnit(r.soil_solution.psi_total_MPa, 3, "MPa"),
             margin === null ? "" : margin + " MPa above wilting point");
      }
    }
    if (r.crop) {
      if (r.relative_yield_pct !== undefined)
        line(dl, "Expected yield", withUnit(r.relative_yield_pct, 3, "%", "no ECe for this reading"),
             r.crop.name + ", Maas-Hoffman" + (r.crop.source_status === "unverified" ?
               " (crop values unverified against their published table)" : ""));
      if (r.leaching_requirement !== undefined)
        line(dl, "Leaching requirement", r.leaching_requirement === null ? "not reachable with this water" :
             Math.round(r.leaching_requirement * 100) + " % of water applied", r.crop.name);
    }
    if (r.unit_note) line(dl, "Unit", r.unit_canonical, r.unit_note);
    preview.appendChild(dl);
    preview.appendChild(el("p", "caution", r.cautions[0] + " " + r.cautions[1]));
  }

  var ORDER = { error: 0, warning: 1, info: 2 };
  var SEVERITY = { info: "Note", warning: "Check", error: "Problem" };
  function renderFlags(flags, into) {
    if (!flags || !flags.length) return;
    var ul = el("ul", "flags");
    flags.slice().sort(function (a, b) { return ORDER[a.severity] - ORDER[b.severity]; }).forEach(function (f) {
      var li = el("li", "flag " + f.severity);
      li.setAttribute("data-code", f.code);
      li.appendChild(el("strong", "", (SEVERITY[f.severity] || "Note") + ": " + (f.label || words(f.code))));
      li.appendChild(document.createTextNode(" " + f.message + " "));
      if (f.action) li.appendChild(el("span", "action", f.action));
      if (f.data && f.data.suggested_unit && into === preview) {
        var b = el("button", "fix", "Use " + f.data.suggested_unit);
        b.type = "button";
        b.setAttribute("data-fix-unit", f.data.suggested_unit);
        b.addEventListener("click", function () { touched.unit = true; uncarry("unit"); setUnit(f.data.suggested_unit); });
        li.appendChild(b);
      }
      ul.appendChild(li);
    });
    into.appendChild(ul);
  }

  function addOption(sel, u) {
    if (u && !Array.prototype.some.call(sel.options, function (o) { return o.value === u; })) {
      var o = document.createElement("option"); o.value = u; o.textContent = u; sel.appendChild(o);
    }
  }
  function setUnit(u) { addOption($("unit"), u); $("unit").value = u; showFor(); schedule(); }
  function setUnitQuiet(u) { addOption($("unit"), u); if (u) $("unit").value = u; }

  // ---- preview (the server runs exactly the checks of a save)
  function askPreview(d, waitMs) {
    var ctl = window.AbortController ? new AbortController() : null;
    var t = ctl ? setTimeout(function () { ctl.abort(); }, waitMs) : null;
    return fetch("/api/preview", { method: "POST", headers: { "Content-Type": "application/json" },
                                   body: JSON.stringify(d), credentials: "same-origin",
                                   signal: ctl ? ctl.signal : undefined })
      .then(function (resp) {
        return resp.json().then(function (body) { return { status: resp.status, body: body }; });
      })
      .finally(function () { if (t) clearTimeout(t); });
  }

  function update() {
    var d = payload();
    dropPreviewErrors(); paintErrors();
    if (confirmKey !== keyOf(d)) hideConfirm();   // the reading changed: ask again on Save
    if (!d.value) {
      lastPreview = null;
      preview.innerHTML = '<p class="muted">Type a reading to see EC at 25 °C, ECe and solute potential.</p>';
      return;
    }
    var my = ++seq, key = keyOf(d), noSample = !d.sample;
    if (noSample) {
      // No results without knowing what was measured; the typed value is still checked.
      preview.innerHTML = '<p class="muted">Choose what was measured (Sample) to see the results.</p>';
      d.sample = "water";
    }
    askPreview(d, 10000).then(function (res) {
      if (my !== seq) return;  // an older answer arriving late
      if (noSample) {
        lastPreview = null;
        if (refusal(res.status)) setError(res.body.field || "form", res.body.error || "Not accepted.", "preview");
        else if (res.body.refused) setError(res.body.refused.field, res.body.refused.error, "preview");
        return;
      }
      if (res.status === 200) {
        lastPreview = { key: key, result: res.body };
        render(res.body);
        if (res.body.refused) setError(res.body.refused.field, res.body.refused.error, "preview");
      } else if (!refusal(res.status)) {   // the server cannot answer now (disk full, not paired)
        lastPreview = null;
        preview.textContent = "";
        preview.appendChild(el("p", "offline", "No preview now: " + (res.body.error || "the server cannot answer.") +
          " Save still works: the reading waits on this device."));
      } else {
        lastPreview = { key: key, refused: res.body };
        preview.textContent = "";
        preview.appendChild(el("p", "err-inline", res.body.error || "Not accepted."));
        setError(res.body.field || "form", res.body.error || "Not accepted.", "preview");
      }
    }).catch(function () {
      if (my !== seq) return;
      lastPreview = null;
      preview.innerHTML = "";
      preview.appendChild(el("p", "offline", "No connection to the server: no preview and no checks now. " +
        "Save still works: the reading waits on this device and is checked when it arrives."));
    });
  }

  // An answer that refuses the reading itself (not a server that cannot answer now).
  function refusal(status) {
    return status >= 400 && status < 500 && [401, 403, 408, 429].indexOf(status) < 0;
  }

  function schedule() { clearTimeout(timer); timer = setTimeout(update, 250); }

  // ---- carried values
  function markCarried(f, why) {
    var input = $(f);
    if (!input) return;
    var has = f === "compensated" ? input.checked : input.value !== "";
    if (!has) return uncarry(f);
    carried[f] = why;
    input.classList.add("carried");
    var holder = input.closest(".field");
    var tag = holder && holder.querySelector(".carried-tag");
    if (holder && !tag) {
      tag = el("span", "carried-tag");
      var label = holder.querySelector("label");
      label.appendChild(tag);
    }
    if (tag) tag.textContent = why;
  }
  function uncarry(f) {
    delete carried[f];
    var input = $(f);
    if (!input) return;
    input.classList.remove("carried");
    var holder = input.closest(".field");
    var tag = holder && holder.querySelector(".carried-tag");
    if (tag) tag.remove();
  }

  function remember() {
    var keep = { at: Date.now() };
    KEEP.forEach(function (f) { keep[f] = f === "compensated" ? $(f).checked : $(f).value; });
    localStorage.setItem(LAST, JSON.stringify(keep));
  }

  function restore() {
    var keep;
    try { keep = JSON.parse(localStorage.getItem(LAST) || "{}"); } catch (e) { keep = {}; }
    var fresh = keep.at && Date.now() - keep.at < TEMP_CARRY_MS;
    KEEP.forEach(function (f) {
      if (keep[f] === undefined || keep[f] === "" || keep[f] === false) return;
      if (f === "temp_c" && !fresh) return;   // an old sample's temperature is not this one's
      if (f === "compensated") $(f).checked = true;
      else if (f === "unit") setUnitQuiet(keep[f]);
      else $(f).value = keep[f];
      markCarried(f, "carried over");
    });
  }

  // A change of site: what belonged to the last site's sample does not carry.
  var siteShown = null;
  function siteChanged() {
    var name = $("site").value.trim();
    if (siteShown !== null && name.toLowerCase() === siteShown.toLowerCase()) return;
    var initial = siteShown === null;
    siteShown = name;
    if ((initial && carried.site) || !name) return;   // the same site as the last reading
    ["temp_c", "sp", "texture", "crop", "ratio", "tds_factor"].forEach(function (f) {
      if (carried[f]) { $(f).value = ""; uncarry(f); }
    });
    var info = siteInfo(name);
    if (info && info.sample) {
      if (!touched.sample) {
        $("sample").value = info.sample; markCarried("sample", "as last time here");
      }
      if (info.unit && !touched.unit) {
        setUnitQuiet(info.unit); markCarried("unit", "as last time here");
      }
    } else if (info && KIND_SAMPLE[info.kind] && !touched.sample) {
      // a site set up as a water source or drain, with no reading yet
      $("sample").value = KIND_SAMPLE[info.kind]; markCarried("sample", "from the site's kind");
    } else if (!touched.sample) {
      $("sample").value = "";   // a new site: the scout chooses what was measured
      uncarry("sample");
    }
    showFor();
  }

  // ---- events
  function onEdit(ev) {
    var t = ev.target, f = t.id === "taken_at_more" ? "taken_at" : t.id;
    if (errors[f]) dropError(f);
    if (errors.form && errors.form.from === "save") dropError("form");
    touched[f] = true;
    if (carried[f]) uncarry(f);
    if (f === "site" && ev.type === "change") siteChanged();
    schedule();
  }
  form.addEventListener("input", onEdit);
  form.addEventListener("change", function (ev) { showFor(); onEdit(ev); });

  // ---- save
  form.addEventListener("submit", function (ev) { ev.preventDefault(); trySave(false); });
  $("save-anyway").addEventListener("click", function () { trySave(true); });
  $("confirm-fix").addEventListener("click", function () {
    hideConfirm(); status("", "ok"); goTo("value");
  });

  var confirmKey = null;     // the reading the "Save anyway" question is about
  function hideConfirm() { $("confirm").hidden = true; confirmKey = null; }

  function trySave(anyway) {
    if (awaiting) { status("Already saving this reading; it is stored once.", "wait"); return; }
    var d = payload();
    if (!d.site) return refuse("site", "Type a site name, e.g. Block 3.");
    if (!d.sample) return refuse("sample", "Choose what was measured: soil extract, water, feed…");
    if (!d.value) return refuse("value", "Type the number the meter shows.");
    var stuck = Object.keys(errors).filter(function (f) { return f !== "form"; })[0];
    if (stuck) return refuse(stuck, errors[stuck].msg);
    var key = keyOf(d);
    var known = lastPreview && lastPreview.key === key ? Promise.resolve(lastPreview) :
      askPreview(d, PREVIEW_WAIT_MS).then(function (res) {
        if (res.status === 200) return { key: key, result: res.body };
        return refusal(res.status) ? { key: key, refused: res.body } : null;
      }).catch(function () { return null; });   // no server: saved unchecked, checked on arrival
    status("Checking…", "wait");
    known.then(function (p) {
      if (p && p.refused) return refuse(p.refused.field || "form", p.refused.error || "Not accepted.");
      if (p && p.result.refused) return refuse(p.result.refused.field, p.result.refused.error);
      var errs = p ? p.result.flags.filter(function (f) { return f.severity === "error"; }) : [];
      if (errs.length && !anyway) { confirmKey = key; return askConfirm(errs); }
      hideConfirm();
      if (p) d._seen_flags = p.result.flags.map(function (f) { return f.code; });
      if (errs.length) d.confirmed_flags = errs.map(function (f) { return f.code; });
      save(d);
    });
  }

  function askConfirm(errs) {
    $("confirm-text").textContent = "Problem: " + errs.map(function (f) {
      return (f.label || words(f.code)) + ". " + f.message;
    }).join(" ") + " Fix it, or save it as it is with one more tap.";
    $("confirm").hidden = false;
    status("", "ok");
    $("save-anyway").focus({ preventScroll: true });
    $("confirm").scrollIntoView({ block: "nearest" });
  }

  function save(d) {
    if (!formUuid) formUuid = box.newId();   // kept until the form is cleared
    d.uuid = formUuid;
    if (correcting) d.supersedes = correcting.uuid;
    if (!box.has(d.uuid)) box.add(d);   // on disk in this browser, once
    remember();
    awaiting = d.uuid;
    $("save").setAttribute("aria-busy", "true");
    status("Saving…", "wait");
    var settled = false;
    var slow = setTimeout(function () {
      if (settled) return;
      settled = true;
      queued(d, "The laptop did not answer. ");
    }, ANSWER_MS);
    box.flush().then(function (results) {
      if (settled) return;
      var mine = (results || []).filter(function (x) { return x.item.uuid === d.uuid; })[0];
      if (!mine && box.sending()) return;    // still on its way: the timer decides
      settled = true; clearTimeout(slow);
      if (mine && mine.ok) {
        done();
        var rec = mine.record, fl = (rec.result && rec.result.flags) || [];
        var worth = fl.filter(function (f) { return f.severity !== "info"; });
        status("Saved to the log: " + d.value + " " + d.unit + ", " + sampleLabel(d.sample) +
               " at " + d.site + (worth.length ? ". To check: " + worth.map(function (f) { return f.label; }).join("; ") : "") +
               ".", "ok");
        if (correcting) { window.location = "/sites/" + rec.site_id; return; }
        cleared(d);
      } else if (mine && !mine.ok) {
        done();
        var refused = box.takeRefused(d.uuid);
        formUuid = null;
        refuse(refused.refused.field || "form", refused.refused.error);
      } else {
        queued(d, box.lastError ? box.lastError + " " : "No connection. ");
      }
    });
  }
  function done() { awaiting = null; $("save").removeAttribute("aria-busy"); }
  function queued(d, why) {
    done();
    var n = box.pending().length;
    status("Not in the log yet: " + why + d.value + " " + d.unit + " at " + d.site +
           " waits on this device (" + n + (n === 1 ? " reading" : " readings") +
           " waiting) and is sent by itself.", "wait");
    if (correcting) { correcting = null; $("site").readOnly = false; }
    cleared(d);
  }
  function sampleLabel(k) {
    // "Soil:water extract 1:N (by mass)" -> "soil:water extract 1:N": only the first letter lowered
    var s = (kind(k).label || k || "").replace(/\s*\(.*\)$/, "");
    return s.charAt(0).toLowerCase() + s.slice(1);
  }

  function cleared(d) {
    formUuid = null; touched = {};
    $("value").value = ""; $("note").value = ""; $("replicate_group").value = "";
    $("taken_at_more").value = "";
    correcting = null; $("correcting").hidden = true; $("taken-field").hidden = true;
    $("form-title").textContent = "New reading"; $("site").readOnly = false;
    lastPreview = null;
    preview.innerHTML = '<p class="muted">Type the next reading.</p>';
    KEEP.forEach(function (f) { markCarried(f, "carried over"); });
    if (siteInfo(d.site) === null) siteLasts.push({ name: d.site, sample: d.sample, unit: d.unit });
    else { siteInfo(d.site).sample = d.sample; siteInfo(d.site).unit = d.unit; }
    siteShown = d.site;
    refreshSites(d.site);
    $("value").focus({ preventScroll: true });
  }

  function refreshSites(name) {
    var list = $("site-list");
    if (!Array.prototype.some.call(list.options, function (o) { return o.value === name; })) {
      var o = document.createElement("option"); o.value = name; list.appendChild(o);
    }
  }

  // ---- readings sent later: say so, and show those that came back flagged
  box.onSent(function (results) {
    var later = results.filter(function (x) { return x.ok && !(awaiting && x.item.uuid === awaiting); });
    if (!later.length || awaiting) return;
    status(later.length + (later.length === 1 ? " reading sent: " : " readings sent: ") +
           later.map(function (x) { return x.item.value + " " + x.item.unit + " at " + x.item.site; }).join("; ") + ".", "ok");
  });

  function renderArrived() {
    var items = box.arrived();
    $("arrived").hidden = !items.length;
    var ul = $("arrived-list");
    ul.textContent = "";
    items.forEach(function (it) {
      var li = el("li", "arrived-item");
      li.setAttribute("data-uuid", it.uuid);
      li.appendChild(el("p", "raw", it.value + " " + it.unit + " · " + it.site +
                        " · " + (it.taken_at || "").slice(0, 16).replace("T", " ")));
      renderFlags(it.flags, li);
      var acts = el("p", "actions");
      var fix = el("a", "button small", "Correct it");
      fix.href = "/?correct=" + encodeURIComponent(it.uuid);
      var ok = el("button", "small", "It is right");
      ok.type = "button";
      ok.addEventListener("click", function () {
        var note = window.prompt("Why is this reading right? (kept with the reading)");
        if (!note || !note.trim()) return;
        Promise.all(it.flags.map(function (f) {
          return fetch("/api/readings/" + encodeURIComponent(it.uuid) + "/ack", {
            method: "POST", headers: { "Content-Type": "application/json" }, credentials: "same-origin",
            body: JSON.stringify({ code: f.code, note: note })
          }).then(function (r) { return r.ok || r.status === 409; });
        })).then(function (oks) {
          if (oks.every(Boolean)) box.dropArrived(it.uuid);
          else window.alert("Could not save the note; try again.");
        }).catch(function () { window.alert("No connection to the server; try again when it is back."); });
      });
      acts.appendChild(fix); acts.appendChild(ok);
      li.appendChild(acts);
      ul.appendChild(li);
    });
  }

  function renderRefused() {
    var items = box.refused();
    var section = $("rejected"), ul = $("rejected-list");
    section.hidden = !items.length;
    ul.textContent = "";
    items.forEach(function (it) {
      var li = el("li", "", it.site + ": " + it.value + " " + it.unit + " — " + it.refused.error + " ");
      var edit = el("button", "", "Fix"); edit.type = "button";
      edit.addEventListener("click", function () {
        var x = box.takeRefused(it.uuid);
        FIELDS.forEach(function (f) { if (x[f] !== undefined) { if (f === "unit") setUnitQuiet(x[f]); else $(f).value = x[f]; } uncarry(f); });
        $("compensated").checked = !!x.compensated;
        showFor(); update();
        if (x.refused.field) { setError(x.refused.field, x.refused.error, "save"); goTo(x.refused.field); }
      });
      var drop = el("button", "", "Discard"); drop.type = "button";
      drop.addEventListener("click", function () {
        if (confirm("Discard this reading for good?")) box.discardRefused(it.uuid);
      });
      li.appendChild(edit); li.appendChild(drop);
      ul.appendChild(li);
    });
  }
  box.onChange(function () { renderRefused(); renderArrived(); });

  function startCorrection(uuid) {
    fetch("/api/readings/" + encodeURIComponent(uuid)).then(function (r) { return r.json(); })
      .then(function (rec) {
        if (!rec.uuid) return;
        correcting = rec;
        KEEP.forEach(uncarry);
        $("form-title").textContent = "Correct a reading";
        $("correcting").hidden = false;
        $("correcting").textContent = "You are correcting " + rec.value + " " + rec.unit + " at " +
          rec.site + ", taken " + wallTime(rec.taken_at).replace("T", " ") +
          ". The old version stays in the log, marked corrected; the time stays unless you change it.";
        $("site").value = rec.site; $("site").readOnly = true; siteShown = rec.site;
        $("sample").value = rec.sample; setUnitQuiet(rec.unit);
        ["value", "ratio", "texture", "depth_cm", "temp_c", "meter", "replicate_group", "note",
         "theta_g_pct", "matric_MPa", "tds_factor", "visited_by"].forEach(function (f) {
          $(f).value = rec[f] !== null && rec[f] !== undefined ? rec[f] : "";
        });
        $("sp").value = rec.sp_pct !== null ? rec.sp_pct : "";
        $("compensated").checked = rec.compensated;
        $("taken-field").hidden = false;
        $("taken_at").value = wallTime(rec.taken_at);
        showFor(); update();
      });
  }

  // A reading in the "check" list that was corrected or voided elsewhere
  // (the site log, another device) leaves the list.
  function settleArrived() {
    box.arrived().forEach(function (it) {
      fetch("/api/readings/" + encodeURIComponent(it.uuid), { credentials: "same-origin" })
        .then(function (r) { return r.ok ? r.json() : null; })
        .then(function (rec) { if (rec && rec.status && rec.status !== "current") box.dropArrived(it.uuid); })
        .catch(function () { /* offline: keep it */ });
    });
  }

  restore();
  var params = new URLSearchParams(window.location.search);
  if (params.get("site") && params.get("site") !== $("site").value) {
    $("site").value = params.get("site"); uncarry("site");
  }
  siteShown = null;
  siteChanged();
  showFor();
  renderRefused();
  renderArrived();
  settleArrived();
  if (params.get("correct")) startCorrection(params.get("correct"));
})();

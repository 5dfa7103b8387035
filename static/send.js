// "Send to the office": pair, names, followed sites, and a sync run by this
// device's server in the background, with progress in plain words.
(function () {
  "use strict";
  const $ = (s) => document.querySelector(s);

  async function post(path, body) {
    const r = await fetch(path, {method: "POST", headers: {"Content-Type": "application/json"},
                                 body: JSON.stringify(body || {})});
    let data = {};
    try { data = await r.json(); } catch (e) { data = {error: "The server answered something unexpected."}; }
    return {ok: r.ok, status: r.status, data: data};
  }

  function showError(prefix, field, message) {
    document.querySelectorAll("[id^='" + prefix + "']").forEach((el) => { el.textContent = ""; });
    const el = document.getElementById(prefix + (field || "")) || document.getElementById(prefix + "url");
    if (el) el.textContent = message || "";
  }

  function para(text, cls) {
    const p = document.createElement("p");
    if (cls) p.className = cls;
    p.textContent = text;
    return p;
  }

  function showJob(job) {
    const box = $("#send-progress");
    box.textContent = "";
    const p = job.progress || {};
    if (job.running || p.stage) {
      const stage = {starting: "Starting…", sending: "Sending to the office…",
                     receiving: "Bringing back the sites you follow…", done: "Finished."}[p.stage] || "";
      if (job.running) box.appendChild(para(stage));
      box.appendChild(para("Sent: " + (p.batches_sent || 0) + " batch(es), " + (p.readings_sent || 0) +
                           " reading version(s). Received: " + (p.batches_received || 0) + " batch(es), " +
                           (p.readings_received || 0) + " reading(s).", "muted progress-counts"));
    }
    if (!job.running && job.outcome) box.appendChild(para(job.outcome, job.ok ? "ok outcome" : "err outcome"));
    $("#send-now").disabled = !!job.running || !state.paired;
  }

  let state = {paired: $("#send-now") && !$("#send-now").disabled};

  function showState(s) {
    state = s;
    $("#office-line").textContent = "";
    if (s.paired) {
      $("#office-line").append("Paired with ");
      const b = document.createElement("strong");
      b.id = "office-url";
      b.textContent = s.office_url;
      $("#office-line").append(b, ".");
    } else {
      $("#office-line").textContent = "Not paired with an office yet.";
    }
    const list = $("#follow-list");
    list.textContent = "";
    s.follows.forEach((f) => {
      const li = document.createElement("li");
      li.dataset.site = f;
      const span = document.createElement("span");
      span.textContent = f;
      const b = document.createElement("button");
      b.type = "button";
      b.className = "small unfollow";
      b.dataset.site = f;
      b.textContent = "Stop following";
      li.append(span, b);
      list.appendChild(li);
    });
    showJob(s.job);
  }

  let timer = null;
  async function poll() {
    const r = await fetch("/api/send/state");
    const s = await r.json();
    showState(s);
    if (s.job.running) timer = setTimeout(poll, 500);
    else timer = null;
  }

  $("#send-now").addEventListener("click", async () => {
    $("#send-now").disabled = true;
    const r = await post("/api/send/start", {});
    if (!r.ok) {
      $("#send-progress").textContent = "";
      $("#send-progress").appendChild(para(r.data.error || "Could not start.", "err outcome"));
      $("#send-now").disabled = false;
      return;
    }
    if (!timer) poll();
  });

  $("#pair-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    const r = await post("/api/send/pair", {url: $("#p-url").value, code: $("#p-code").value,
                                            name: $("#s-name").value, person: $("#s-person").value});
    if (!r.ok) { showError("perr-", r.data.field, r.data.error); return; }
    showError("perr-", null, "");
    $("#p-code").value = "";
    showState(r.data);
  });

  $("#person-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    const r = await post("/api/send/settings", {person: $("#s-person").value, name: $("#s-name").value});
    if (!r.ok) { showError("serr-", r.data.field, r.data.error); return; }
    showError("serr-", null, "");
    $("#person-saved").textContent = "Kept. New readings on this device record this person.";
    showState(r.data);
  });

  $("#follow-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    const r = await post("/api/send/follow", {site: $("#f-site").value, follow: true});
    if (!r.ok) { showError("ferr-", "site", r.data.error); return; }
    showError("ferr-", null, "");
    $("#f-site").value = "";
    showState(r.data);
  });

  $("#follow-list").addEventListener("click", async (ev) => {
    const b = ev.target.closest("button.unfollow");
    if (!b) return;
    const r = await post("/api/send/follow", {site: b.dataset.site, follow: false});
    if (r.ok) showState(r.data);
  });

  poll();
})();

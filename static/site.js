/* Site log: void a reading (it stays in the log with the reason). */
(function () {
  "use strict";
  document.querySelectorAll(".void-btn").forEach(function (b) {
    b.addEventListener("click", function () {
      var reason = window.prompt("Why is this reading void? (it stays in the log, marked void)");
      if (!reason || !reason.trim()) return;
      fetch("/api/readings/" + encodeURIComponent(b.getAttribute("data-uuid")) + "/void", {
        method: "POST", headers: { "Content-Type": "application/json" },
        body: JSON.stringify({ reason: reason }), credentials: "same-origin"
      }).then(function (r) { return r.json().then(function (body) { return { ok: r.ok, body: body }; }); })
        .then(function (res) {
          if (res.ok) window.location.reload();
          else window.alert(res.body.error || "Could not void the reading.");
        })
        .catch(function () { window.alert("No connection to the server; try again when it is back."); });
    });
  });
  document.querySelectorAll(".ack-btn").forEach(function (b) {
    b.addEventListener("click", function () {
      var note = window.prompt("Why is this flag acceptable? (kept with the reading)");
      if (!note || !note.trim()) return;
      fetch("/api/readings/" + encodeURIComponent(b.getAttribute("data-uuid")) + "/ack", {
        method: "POST", headers: { "Content-Type": "application/json" },
        body: JSON.stringify({ code: b.getAttribute("data-code"), note: note }), credentials: "same-origin"
      }).then(function (r) { return r.json().then(function (body) { return { ok: r.ok, body: body }; }); })
        .then(function (res) {
          if (res.ok) window.location.reload();
          else window.alert(res.body.error || "Could not save the note.");
        })
        .catch(function () { window.alert("No connection to the server; try again when it is back."); });
    });
  });
})();

/* Site log: void a reading (it stays in the log with the reason) or
 * acknowledge a flag with a note (the flag stays, the note says why). */
(function () {
  "use strict";
  function askAndPost(selector, question, path, body, failure) {
    document.querySelectorAll(selector).forEach(function (b) {
      b.addEventListener("click", function () {
        var answer = window.prompt(question);
        if (!answer || !answer.trim()) return;
        fetch("/api/readings/" + encodeURIComponent(b.getAttribute("data-uuid")) + path, {
          method: "POST", headers: { "Content-Type": "application/json" },
          body: JSON.stringify(body(b, answer)), credentials: "same-origin"
        }).then(function (r) { return r.json().then(function (j) { return { ok: r.ok, body: j }; }); })
          .then(function (res) {
            if (res.ok) window.location.reload();
            else window.alert(res.body.error || failure);
          })
          .catch(function () { window.alert("No connection to the server; try again when it is back."); });
      });
    });
  }
  askAndPost(".void-btn", "Why is this reading void? (it stays in the log, marked void)", "/void",
             function (b, reason) { return { reason: reason }; }, "Could not void the reading.");
  askAndPost(".ack-btn", "Why is this flag acceptable? (kept with the reading)", "/ack",
             function (b, note) { return { code: b.getAttribute("data-code"), note: note }; },
             "Could not save the note.");
})();

// The office page: a new pairing code, unpairing a device (office machine only).
(function () {
  "use strict";
  async function post(path) {
    const r = await fetch(path, {method: "POST", headers: {"Content-Type": "application/json"}, body: "{}"});
    return r.ok;
  }
  const code = document.querySelector("#office-new-code");
  if (code) code.addEventListener("click", async () => { if (await post("/office/code")) location.reload(); });
  document.querySelectorAll("button.revoke-device").forEach((b) => {
    b.addEventListener("click", async () => {
      if (await post("/office/devices/" + b.dataset.device + "/revoke")) location.reload();
    });
  });
})();

/* Map page: where am I relative to the sites? Uses the device's position when
 * the browser allows it (localhost or HTTPS only), otherwise typed coordinates.
 * Draws a "you" mark on the plot made by the server (fieldapp.charts.map_svg)
 * and lists great-circle distances. Nothing here needs the internet. */
(function () {
  "use strict";
  var R_KM = 6371.0088;  // mean Earth radius, as in fieldapp/charts.py
  var svg = document.querySelector("#map svg");
  var points = JSON.parse(document.getElementById("map-points").textContent || "[]");
  var status = document.getElementById("geo-status");
  var btn = document.getElementById("geo-btn");
  var form = document.getElementById("coord-form");
  var here = document.getElementById("here");
  var saveForm = document.getElementById("save-form");
  var last = null;

  function say(text) { status.textContent = text; status.hidden = !text; }

  function rad(d) { return d * Math.PI / 180; }
  function haversineKm(lat1, lon1, lat2, lon2) {
    var dp = rad(lat2 - lat1), dl = rad(lon2 - lon1);
    var a = Math.pow(Math.sin(dp / 2), 2) +
            Math.cos(rad(lat1)) * Math.cos(rad(lat2)) * Math.pow(Math.sin(dl / 2), 2);
    return 2 * R_KM * Math.asin(Math.min(1, Math.sqrt(a)));
  }
  function fmtDist(km) {
    if (km < 0.1) return Math.round(km * 1000) + " m";
    if (km < 1) return Math.round(km * 100) * 10 + " m";
    if (km < 10) return km.toFixed(1) + " km";
    return Math.round(km) + " km";
  }

  /* "10.0012", "10,0012", "-20.5", "20.5 W", "S 10.2" -> number, or an error text. */
  function parseCoord(text, isLat) {
    var s = String(text || "").trim().toUpperCase().replace(/°/g, "");
    if (!s) return { error: "Type the " + (isLat ? "latitude" : "longitude") + "." };
    var sign = 1, m = s.match(/^([NSEW])\s*(.*)$/) || s.match(/^(.*?)\s*([NSEW])$/);
    if (m) {
      var letter = /^[NSEW]$/.test(m[1]) ? m[1] : m[2];
      s = (/^[NSEW]$/.test(m[1]) ? m[2] : m[1]).trim();
      if (isLat && /[EW]/.test(letter) || !isLat && /[NS]/.test(letter)) {
        return { error: isLat ? "A latitude ends with N or S." : "A longitude ends with E or W." };
      }
      if (letter === "S" || letter === "W") sign = -1;
      if (s.charAt(0) === "-") return { error: "Use either a minus sign or S / W, not both." };
    }
    // a comma as decimal separator is unambiguous here (no thousands in degrees)
    if (s.indexOf(",") >= 0 && s.indexOf(".") < 0 && s.split(",").length === 2) s = s.replace(",", ".");
    if (!/^-?\d+(\.\d+)?$/.test(s)) {
      return { error: "Decimal degrees only, e.g. " + (isLat ? "10.0012" : "-20.0031") + "." };
    }
    var v = sign * parseFloat(s), lim = isLat ? 90 : 180;
    if (!(Math.abs(v) <= lim)) return { error: (isLat ? "Latitude" : "Longitude") + " must be between −" + lim + " and " + lim + "." };
    return { value: v };
  }

  function project(lat, lon) {
    var d = svg.dataset, k = Math.PI / 180 * parseFloat(d.radiusKm || R_KM);
    var lat0 = parseFloat(d.lat0), lon0 = parseFloat(d.lon0), s = parseFloat(d.pxPerKm);
    var x = parseFloat(d.cx) + (lon - lon0) * k * Math.cos(rad(lat0)) * s;
    var y = parseFloat(d.cy) - (lat - lat0) * k * s;
    return [x, y];
  }

  function mark(lat, lon) {
    if (!svg) return false;
    var old = svg.querySelector(".you");
    if (old) old.parentNode.removeChild(old);
    var p = project(lat, lon), vb = svg.viewBox.baseVal;
    if (!(p[0] >= 0 && p[0] <= vb.width && p[1] >= 0 && p[1] <= vb.height)) return false;
    var NS = "http://www.w3.org/2000/svg", g = document.createElementNS(NS, "g");
    g.setAttribute("class", "you");
    g.innerHTML = '<circle cx="' + p[0] + '" cy="' + p[1] + '" r="9" fill="none" stroke="#000" stroke-width="2"/>' +
      '<line x1="' + (p[0] - 13) + '" y1="' + p[1] + '" x2="' + (p[0] + 13) + '" y2="' + p[1] + '" stroke="#000" stroke-width="1.5"/>' +
      '<line x1="' + p[0] + '" y1="' + (p[1] - 13) + '" x2="' + p[0] + '" y2="' + (p[1] + 13) + '" stroke="#000" stroke-width="1.5"/>' +
      '<text x="' + (p[0] + 12) + '" y="' + (p[1] - 10) + '" font-size="12" font-weight="700" paint-order="stroke" stroke="#fff" stroke-width="3">you</text>';
    svg.appendChild(g);
    return true;
  }

  function show(lat, lon, accuracy) {
    last = { lat: lat, lon: lon };
    var onMap = mark(lat, lon);
    here.textContent = "";
    var h = document.createElement("p");
    h.innerHTML = "<strong>You:</strong> ";
    h.appendChild(document.createTextNode(lat.toFixed(5) + ", " + lon.toFixed(5) +
      (accuracy ? " (± " + Math.round(accuracy) + " m)" : "") +
      (svg && !onMap ? " — outside the plotted area." : "")));
    here.appendChild(h);
    if (points.length) {
      var list = points.map(function (p) {
        return { p: p, km: haversineKm(lat, lon, p.lat, p.lon) };
      }).sort(function (a, b) { return a.km - b.km; });
      var near = document.createElement("p");
      near.className = "nearest";
      near.textContent = "Nearest site: " + list[0].p.n + " " + list[0].p.name + ", " + fmtDist(list[0].km) + ".";
      here.appendChild(near);
      var ul = document.createElement("ul");
      ul.className = "you-dist";
      list.slice(0, 6).forEach(function (e) {
        var li = document.createElement("li");
        li.textContent = e.p.n + " " + e.p.name + ": " + fmtDist(e.km);
        ul.appendChild(li);
      });
      here.appendChild(ul);
    }
    if (saveForm) saveForm.hidden = false;
  }

  function setErr(id, text) {
    var e = document.getElementById("err-" + id), f = document.getElementById(id);
    if (e) e.textContent = text || "";
    if (f) f.classList.toggle("invalid", !!text);
  }

  // Browsers give the position only to secure pages: https:// or localhost.
  if (!window.isSecureContext) {
    say("This page was opened over plain http from another machine, so the browser will not " +
        "share this device's position (it does so only on localhost or https). Type the " +
        "coordinates from a GPS or a phone instead.");
    btn.hidden = true;
  } else if (!("geolocation" in navigator)) {
    say("This browser cannot give a position. Type the coordinates instead.");
    btn.hidden = true;
  }

  btn.addEventListener("click", function () {
    say("Asking the device for its position…");
    navigator.geolocation.getCurrentPosition(function (pos) {
      say("");
      document.getElementById("lat").value = pos.coords.latitude.toFixed(6);
      document.getElementById("lon").value = pos.coords.longitude.toFixed(6);
      show(pos.coords.latitude, pos.coords.longitude, pos.coords.accuracy);
    }, function (err) {
      var why = err.code === 1 ? "permission was refused" :
                err.code === 3 ? "the device took too long" : "no position is available";
      say("No position from the device (" + why + "). Type the coordinates instead.");
    }, { enableHighAccuracy: true, timeout: 20000, maximumAge: 60000 });
  });

  form.addEventListener("submit", function (ev) {
    ev.preventDefault();
    var latIn = document.getElementById("lat"), lonIn = document.getElementById("lon");
    // a pasted pair "10.0012, 20.0031" in the first box
    var pair = latIn.value.match(/^\s*(\S+)\s*[;]\s*(\S+)\s*$/) || latIn.value.match(/^\s*(\S+?),\s+(\S+)\s*$/);
    if (pair && !lonIn.value.trim()) { latIn.value = pair[1]; lonIn.value = pair[2]; }
    var a = parseCoord(latIn.value, true), b = parseCoord(lonIn.value, false);
    setErr("lat", a.error); setErr("lon", b.error);
    if (a.error || b.error) return;
    show(a.value, b.value, null);
  });

  if (saveForm) {
    saveForm.addEventListener("submit", function (ev) {
      ev.preventDefault();
      var err = document.getElementById("err-save");
      err.textContent = "";
      if (!last) { err.textContent = "Show a position first."; return; }
      var id = document.getElementById("save-site").value;
      fetch("/api/sites/" + encodeURIComponent(id), {
        method: "PATCH", headers: { "Content-Type": "application/json" }, credentials: "same-origin",
        body: JSON.stringify({ latitude: last.lat, longitude: last.lon })
      }).then(function (r) { return r.json().then(function (b) { return { ok: r.ok, body: b }; }); })
        .then(function (res) {
          if (res.ok) window.location.reload();
          else err.textContent = res.body.error || "Could not save the coordinates.";
        })
        .catch(function () { err.textContent = "No connection to the server; nothing was saved."; });
    });
  }
  window.fieldappMap = { parseCoord: parseCoord, haversineKm: haversineKm, show: show };
})();

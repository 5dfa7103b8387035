"""Benchmark: how soon a page is usable on a slow tablet.

    .venv/bin/python tests/benchmarks/bench_tablet.py [--repeat 7] [--rate 4] [--before TREE]

Headless Chromium (/usr/bin/chromium, through Playwright) at 800x1280 with
the CPU slowed ``--rate`` times through CDP (Emulation.setCPUThrottlingRate),
a fresh browser context per visit (a first visit: nothing cached, no service
worker yet). Pages: the entry form of an empty log, and the log of a site
with 17 readings (invented, saved through the API beforehand).

"Usable" is the later of the first contentful paint and the end of
DOMContentLoaded (the page's scripts, loaded at the end of the body, have run
and attached their handlers by then), from navigation start.

Floor, same browser, same throttle, same run: a bare static HTML page (text
only, no CSS, no script) of the same byte size as everything the page loads
(its HTML, CSS and scripts), served by a bare Python http.server on
127.0.0.1. Targets (issue 12): the entry form 0.5 s, the site page 0.8 s.

Also printed, to see where the time goes: the bytes per kind, and Chromium's
own counters after the load (Performance.getMetrics: script, style, layout
and task seconds, under the throttle). Figures only; nothing passes or fails.

``--before TREE`` serves the same readings from another checkout's fieldapp
(an older commit, e.g. from ``git archive``) and visits its pages in turn with
this one's and the floor's, so a before and after come from one run.
"""
from __future__ import annotations

import argparse
import http.server
import json
import os
import statistics
import subprocess
import sys
import tempfile
import threading
import urllib.request
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))
from conftest import CHROMIUM, CHROMIUM_ARGS, ServerProcess  # noqa: E402

TABLET = {"width": 800, "height": 1280}
_USABLE_JS = """() => {
  const nav = performance.getEntriesByType('navigation')[0];
  const fcp = performance.getEntriesByName('first-contentful-paint')[0];
  const res = performance.getEntriesByType('resource').map(r => ({
      name: r.name, kind: r.initiatorType, bytes: r.encodedBodySize, start: r.startTime,
      end: r.responseEnd}));
  return {dcl: nav.domContentLoadedEventEnd, load: nav.loadEventEnd,
          fcp: fcp ? fcp.startTime : null, html_bytes: nav.encodedBodySize,
          response_end: nav.responseEnd, resources: res};
}"""


def _post(url, body):
    req = urllib.request.Request(url, json.dumps(body).encode(), method="POST",
                                 headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(req, timeout=30) as r:
        return json.loads(r.read())


def seventeen_readings(base) -> int:
    """17 invented readings at one site (soil extracts at three depths over a
    few visits, the water, a paste); returns the site's id."""
    rec = None
    for i in range(17):
        if i % 6 == 5:
            body = {"sample": "water", "value": f"{820 + 15 * i}", "unit": "µS/cm",
                    "temp_c": "19"}
        elif i % 6 == 4:
            body = {"sample": "paste", "value": f"{2.1 + 0.1 * i:.1f}", "unit": "dS/m",
                    "compensated": True}
        else:
            body = {"sample": "extract", "ratio": "1:5", "value": f"{0.31 + 0.02 * i:.2f}",
                    "unit": "mS/cm", "temp_c": "17", "texture": "loam",
                    "depth_cm": str(15 * (i % 3))}
        rec = _post(base + "/api/readings", {**body, "site": "Block 3",
                                             "taken_at": f"2026-04-{1 + i:02d}T09:00:00+02:00"})
    return rec["site_id"]


class _Quiet(http.server.SimpleHTTPRequestHandler):
    def log_message(self, *a):
        pass


def bare_server(folder: Path):
    """A bare http.server on 127.0.0.1 serving ``folder``; (server, port)."""
    handler = lambda *a, **k: _Quiet(*a, directory=str(folder), **k)   # noqa: E731
    srv = http.server.ThreadingHTTPServer(("127.0.0.1", 0), handler)
    threading.Thread(target=srv.serve_forever, daemon=True).start()
    return srv, srv.server_address[1]


def bare_page(folder: Path, name: str, size: int) -> str:
    """A text-only HTML page of ``size`` bytes."""
    head = "<!doctype html><html lang=en><meta charset=utf-8><title>floor</title><body>"
    para = "<p>" + "Plain text of the same weight as the page. " * 4 + "</p>\n"
    body = head + para * max(0, (size - len(head)) // len(para))
    body += "x" * max(0, size - len(body.encode()))
    (folder / name).write_text(body, encoding="utf-8")
    return name


def visit(browser, url, rate) -> dict:
    ctx = browser.new_context(viewport=TABLET)
    try:
        page = ctx.new_page()
        cdp = ctx.new_cdp_session(page)
        cdp.send("Emulation.setCPUThrottlingRate", {"rate": rate})
        cdp.send("Performance.enable")
        page.goto(url, wait_until="load")
        page.wait_for_function("() => performance.getEntriesByName('first-contentful-paint')"
                               ".length > 0", timeout=10000)
        got = page.evaluate(_USABLE_JS)
        metrics = {m["name"]: m["value"] for m in cdp.send("Performance.getMetrics")["metrics"]}
        got["usable_ms"] = max(got["dcl"], got["fcp"] or 0)
        got["metrics"] = {k: metrics.get(k, 0.0) for k in
                          ("ScriptDuration", "RecalcStyleDuration", "LayoutDuration",
                           "TaskDuration")}
        return got
    finally:
        ctx.close()


def _summary(runs) -> dict:
    med = lambda k: statistics.median(r[k] for r in runs)         # noqa: E731
    out = {"usable_ms": med("usable_ms"), "fcp_ms": med("fcp"), "dcl_ms": med("dcl"),
           "load_ms": med("load"), "min_ms": min(r["usable_ms"] for r in runs),
           "html_bytes": runs[-1]["html_bytes"], "resources": runs[-1]["resources"],
           "metrics": {k: statistics.median(r["metrics"][k] for r in runs)
                       for k in runs[0]["metrics"]}}
    out["total_bytes"] = out["html_bytes"] + sum(r["bytes"] for r in out["resources"])
    return out


class TreeServer(ServerProcess):
    """``python -P -m fieldapp serve`` from another checkout (-P: this folder's
    fieldapp never shadows the tree's)."""

    def __init__(self, tree: Path, data_dir: Path):
        super().__init__(data_dir)
        self.tree = Path(tree)

    def start(self, timeout=60):
        self.proc = subprocess.Popen(
            [sys.executable, "-P", "-m", "fieldapp", "serve", "--port", str(self.port),
             "--data", str(self.data_dir)], stdout=subprocess.DEVNULL,
            stderr=subprocess.STDOUT, env=dict(os.environ, PYTHONPATH=str(self.tree)),
            cwd=self.tree)
        for _ in range(int(timeout * 10)):
            try:
                urllib.request.urlopen(self.url + "/api/sites", timeout=1).read()
                return self
            except OSError:
                if self.proc.poll() is not None:
                    raise RuntimeError(f"the server of {self.tree} exited")
                threading.Event().wait(0.1)
        raise RuntimeError("server did not start")


def measure(browser, urls, rate, repeat) -> list[dict]:
    """One summary per URL (the page, its floor, the page before): visits
    alternate, so a busy machine slows them alike."""
    runs = [[] for _ in urls]
    for _ in range(repeat):
        for out, url in zip(runs, urls):
            out.append(visit(browser, url, rate))
    return [_summary(r) for r in runs]


def _report(label, got, floor, target_ms, before=None):
    print(f"{label}")
    print(f"  usable after {got['usable_ms']:6.0f} ms (fastest {got['min_ms']:.0f}; FCP "
          f"{got['fcp_ms']:.0f}, DOMContentLoaded {got['dcl_ms']:.0f}, load "
          f"{got['load_ms']:.0f})   target {target_ms} ms")
    print(f"  floor: bare static page of {floor['html_bytes'] / 1024:.1f} KB "
          f"{floor['usable_ms']:6.0f} ms (fastest {floor['min_ms']:.0f})   ratio "
          f"{got['usable_ms'] / floor['usable_ms']:.2f}x")
    if before is not None:
        print(f"  before (--before): {before['usable_ms']:6.0f} ms (fastest {before['min_ms']:.0f}; "
              f"FCP {before['fcp_ms']:.0f}, DOMContentLoaded {before['dcl_ms']:.0f})   ratio "
              f"{before['usable_ms'] / floor['usable_ms']:.2f}x")
    kinds = {}
    for r in got["resources"]:
        kinds[r["kind"]] = kinds.get(r["kind"], 0) + r["bytes"]
    print(f"  bytes: html {got['html_bytes'] / 1024:.1f} KB, "
          + ", ".join(f"{k} {v / 1024:.1f} KB" for k, v in sorted(kinds.items()))
          + f" ({len(got['resources'])} requests besides the page)")
    m = got["metrics"]
    print(f"  Chromium, throttled: script {m['ScriptDuration'] * 1000:.0f} ms, style "
          f"{m['RecalcStyleDuration'] * 1000:.0f} ms, layout {m['LayoutDuration'] * 1000:.0f} ms, "
          f"all tasks {m['TaskDuration'] * 1000:.0f} ms")


def main(argv=None) -> int:
    p = argparse.ArgumentParser(prog="bench_tablet")
    p.add_argument("--repeat", type=int, default=7)
    p.add_argument("--rate", type=float, default=4)
    p.add_argument("--before", metavar="TREE", help="another checkout's fieldapp, visited "
                   "in turn for a before/after in the same run")
    a = p.parse_args(argv)
    if not os.path.exists(CHROMIUM):
        print(f"no Chromium at {CHROMIUM}")
        return 1
    from playwright.sync_api import sync_playwright
    with tempfile.TemporaryDirectory(prefix="fieldapp-tablet-") as d:
        srv = ServerProcess(Path(d) / "log").start(timeout=60)
        old = TreeServer(a.before, Path(d) / "before").start() if a.before else None
        floor_dir = Path(d) / "floor"
        floor_dir.mkdir()
        bare, port = bare_server(floor_dir)
        try:
            site_id = seventeen_readings(srv.url)
            if old is not None and seventeen_readings(old.url) != site_id:
                raise RuntimeError("the two logs gave the site different ids")
            with sync_playwright() as pw:
                b = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS,
                                       headless=True)
                print(f"Chromium {b.version}, {TABLET['width']}x{TABLET['height']}, CPU "
                      f"throttled {a.rate:g}x through CDP; median of {a.repeat} first visits, "
                      "each beside a visit of its floor")
                for label, path, target in (("entry form, first visit (GET /)", "/", 500),
                                            (f"site page, 17 readings (GET /sites/{site_id})",
                                             f"/sites/{site_id}", 800)):
                    visit(b, srv.url + path, a.rate)                      # warm the server
                    size = _summary([visit(b, srv.url + path, a.rate)])["total_bytes"]
                    name = bare_page(floor_dir, f"floor{target}.html", size)
                    urls = [srv.url + path, f"http://127.0.0.1:{port}/{name}"]
                    if old is not None:
                        visit(b, old.url + path, a.rate)
                        urls.append(old.url + path)
                    got, floor, *before = measure(b, urls, a.rate, a.repeat)
                    _report(label, got, floor, target, before[0] if before else None)
                b.close()
        finally:
            bare.shutdown()
            srv.stop()
            if old is not None:
                old.stop()
    return 0


if __name__ == "__main__":
    sys.exit(main())

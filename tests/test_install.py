"""A plain install, as a new user makes it: build the wheel from the repository's
own files, install it into a fresh virtual environment outside the checkout,
start ``fieldapp serve`` from there and load every page and static file.

`pip install .` and `pipx install .` build this same wheel, so this covers them.
The test is skipped (with the reason) only when no wheel can be built or its
dependencies cannot be installed on this machine (no package index); a build
that runs and leaves pages or files out fails.
"""
from __future__ import annotations

import os
import shutil
import subprocess
import sys
import time
import urllib.error
import urllib.request
import venv
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
pytestmark = pytest.mark.install

#: What pip prints when it cannot reach a package index or find a build backend.
_NO_INDEX = ("Could not find a version that satisfies", "No matching distribution",
             "Failed to establish a new connection", "Network is unreachable",
             "Temporary failure in name resolution")


def _repo_files(dest: Path) -> None:
    """Copy the repository's files (tracked or new, not ignored): what a clone holds."""
    try:
        names = subprocess.run(["git", "ls-files", "-z", "--cached", "--others", "--exclude-standard"], cwd=ROOT, capture_output=True,
                               check=True).stdout.decode().split("\0")
    except (OSError, subprocess.CalledProcessError):
        names = None
    if not names or names == [""]:
        shutil.copytree(ROOT, dest, ignore=shutil.ignore_patterns(
            ".venv", ".git", "build", "dist", "*.egg-info", "__pycache__", ".pytest_cache"))
        return
    for name in filter(None, names):
        src = ROOT / name
        if src.is_file():
            (dest / name).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(src, dest / name)


def _pip(python, *args, cwd):
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PIP_REQUIRE_VIRTUALENV")}
    return subprocess.run([str(python), "-m", "pip", "--disable-pip-version-check", *args],
                          cwd=cwd, capture_output=True, text=True, env=env, timeout=900)


def _skip_or_fail(what: str, p: subprocess.CompletedProcess):
    out = p.stdout + p.stderr
    if any(s in out for s in _NO_INDEX):
        last = [ln for ln in out.splitlines() if ln.strip() and "Location 'file" not in ln]
        pytest.skip(f"cannot {what} here (no package index?): {last[-1] if last else out}")
    pytest.fail(f"{what} failed:\n{out[-4000:]}")


@pytest.fixture(scope="module")
def installed(tmp_path_factory):
    """(python of the fresh venv, its fieldapp script, a folder outside the checkout)."""
    work = tmp_path_factory.mktemp("install")
    src = work / "src"
    src.mkdir()
    _repo_files(src)
    dist = work / "dist"
    p = _pip(sys.executable, "wheel", "--no-deps", "-w", str(dist), str(src), cwd=work)
    if p.returncode != 0:
        _skip_or_fail("build the wheel", p)
    wheels = list(dist.glob("fieldapp-*.whl"))
    assert len(wheels) == 1, p.stdout
    env_dir = work / "venv"
    venv.EnvBuilder(with_pip=True, clear=True).create(env_dir)
    bindir = env_dir / ("Scripts" if os.name == "nt" else "bin")
    python = bindir / ("python.exe" if os.name == "nt" else "python")
    p = _pip(python, "install", "-q", str(wheels[0]), cwd=work)
    if p.returncode != 0:
        _skip_or_fail("install the wheel and its dependencies", p)
    shutil.rmtree(src)          # nothing of the checkout is left to lean on
    script = bindir / ("fieldapp.exe" if os.name == "nt" else "fieldapp")
    return python, script, work


def test_the_wheel_carries_the_page_and_no_checkout_is_used(installed):
    python, _, work = installed
    p = subprocess.run([str(python), "-c", "import fieldapp; print(fieldapp.__file__); "
                        "print(fieldapp.resource_dir('templates')); "
                        "print(fieldapp.resource_dir('static'))"],
                       cwd=work, capture_output=True, text=True, timeout=60,
                       env={k: v for k, v in os.environ.items() if k != "PYTHONPATH"})
    assert p.returncode == 0, p.stderr
    pkg, templates, static = (Path(x) for x in p.stdout.split("\n")[:3])
    venv_dir = work / "venv"
    for path in (pkg, templates, static):
        assert venv_dir in path.parents, f"{path} is not inside the fresh venv"
        assert ROOT not in path.parents
    assert sorted(f.name for f in templates.iterdir() if f.suffix == ".html") == \
        sorted(f.name for f in (ROOT / "templates").glob("*.html"))
    assert sorted(f.name for f in static.iterdir() if f.is_file()) == \
        sorted(f.name for f in (ROOT / "static").iterdir() if f.is_file())


def _get(url: str) -> tuple[int, bytes, str]:
    try:
        with urllib.request.urlopen(url, timeout=30) as r:
            return r.status, r.read(), r.headers.get("Content-Type", "")
    except urllib.error.HTTPError as e:
        return e.code, e.read(), e.headers.get("Content-Type", "")


def test_installed_server_serves_every_page_and_static_file(installed):
    _, script, work = installed
    import socket
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    proc = subprocess.Popen([str(script), "serve", "--port", str(port), "--data",
                             str(work / "data"), "--demo"], cwd=work, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.STDOUT)
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.time() + 60
        while True:
            try:
                status, body, _ = _get(base + "/api/sites")
                break
            except OSError:
                if proc.poll() is not None or time.time() > deadline:
                    proc.kill()
                    pytest.fail("the installed server did not start:\n"
                                + proc.stdout.read().decode(errors="replace"))
                time.sleep(0.1)
        import json
        sites = json.loads(body)
        assert status == 200 and len(sites) >= 3       # the demo scenario
        pages = ["/", "/sites", "/sites/new", "/meters", "/map", "/pair"]
        for s in sites:
            pages += [f"/sites/{s['id']}", f"/sites/{s['id']}/settings",
                      f"/sites/{s['id']}/report"]
        for path in pages:
            status, body, ctype = _get(base + path)
            assert status == 200, (path, status, body[:300])
            assert ctype.startswith("text/html") and b"</html>" in body, path
            assert b"TemplateNotFound" not in body
        status, body, ctype = _get(base + "/export.csv")
        assert status == 200 and ctype.startswith("text/csv") and body.count(b"\n") > 10
        status, body, _ = _get(base + "/sw.js")
        assert status == 200 and body == (ROOT / "static" / "sw.js").read_bytes()
        files = [f for f in (ROOT / "static").iterdir() if f.is_file()]
        assert files
        for f in files:
            status, body, _ = _get(f"{base}/static/{f.name}")
            assert status == 200, f.name
            assert body == f.read_bytes(), f"{f.name} differs from the repository's"
        # the command line of the same install
        p = subprocess.run([str(script), "convert", "1413", "µS/cm", "--sample", "water",
                            "--temp", "25", "--json"], cwd=work, env=env, capture_output=True,
                           timeout=60)
        assert p.returncode == 0, p.stderr
        assert json.loads(p.stdout)["ec25_dS_m"] == pytest.approx(1.413)
    finally:
        proc.terminate()
        try:
            proc.wait(10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()

"""Pages that extend base.html put their scripts in its head (the scripts
block), so each must be deferred: a plain script there runs before the page's
body exists and finds none of its fields (the Send to the office page did)."""
from __future__ import annotations

import re
from pathlib import Path

TEMPLATES = Path(__file__).resolve().parent.parent / "templates"


def test_every_script_in_the_head_block_is_deferred():
    checked = 0
    for t in sorted(TEMPLATES.glob("*.html")):
        text = t.read_text(encoding="utf-8")
        for block in re.findall(r"{% block scripts %}(.*?){% endblock %}", text, re.S):
            for tag in re.findall(r"<script\b[^>]*>", block):
                checked += 1
                assert " defer" in tag or "type=\"module\"" in tag, f"{t.name}: {tag}"
    assert checked >= 5          # the entry, site, map, meters, send and office pages

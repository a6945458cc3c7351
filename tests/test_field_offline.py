"""Offline: no page or file reaches outside the laptop, and every asset a page names is served."""

from __future__ import annotations

import json
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest
from conftest import DEMO, ROOT

from ebbtide.game_logic.study import load_study
from ebbtide.server import create_app

PIN = "8642"
VENDOR = ROOT / "static" / "vendor"
# Anything a browser could load from elsewhere: attributes, CSS, script calls, absolute addresses.
LOADING = re.compile(
    r"""(?:src|href|action|poster|data)\s*=\s*["']?\s*(?:https?:|wss?:|//)"""
    r"""|url\(\s*["']?\s*(?:https?:|//)"""
    r"""|@import\s+(?:url\()?\s*["']?\s*(?:https?:|//)"""
    r"""|fetch\(\s*["'`]\s*(?:https?:|//)"""
    r"""|wss?://|https?://""",
    re.IGNORECASE,
)
# The two places the vendored socket.io client (4.8.4, unmodified) spells an address, both inert:
# an error message shown when a server of another major version answers, and the scheme it puts
# in front of a bare host name given to io(); our pages call io() with no address at all.
VENDOR_ALLOWED = (
    "(more information here: https://socket.io/docs/v3/migrating-from-2-x-to-3-0/)",
    '(t=void 0!==i?i.protocol+"//"+t:"https://"+t)',
)


# XML namespace names are identifiers that browsers never fetch (W3C Namespaces in XML, section 2).
NAMESPACES = ("http://www.w3.org/2000/svg", "http://www.w3.org/1999/xlink", "http://www.w3.org/1999/xhtml")


def own_files():
    for folder in ("templates", "static"):
        for path in sorted((ROOT / folder).rglob("*")):
            if path.is_file() and VENDOR not in path.parents:
                yield path


@pytest.mark.parametrize("path", list(own_files()), ids=lambda p: str(p.relative_to(ROOT)))
def test_own_template_or_static_file_names_no_outside_address(path: Path):
    text = path.read_text(encoding="utf-8")
    for namespace in NAMESPACES:
        text = text.replace(f'"{namespace}"', '""')
    assert LOADING.findall(text) == [], path


def test_vendored_client_spells_addresses_only_in_inert_places():
    text = (VENDOR / "socket.io.min.js").read_text(encoding="utf-8")
    for allowed in VENDOR_ALLOWED:
        assert allowed in text  # the allowance must fail loudly when the file changes
        text = text.replace(allowed, "")
    assert LOADING.findall(text) == []


def test_vendored_source_map_holds_addresses_only_in_embedded_source_comments():
    source_map = json.loads((VENDOR / "socket.io.min.js.map").read_text(encoding="utf-8"))
    outside = {key: value for key, value in source_map.items() if key != "sourcesContent"}
    assert LOADING.findall(json.dumps(outside)) == []


class _Assets(HTMLParser):
    def __init__(self):
        super().__init__()
        self.found: list[str] = []
        self.inline_scripts = 0

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        for name in ("src", "href"):
            if attrs.get(name):
                self.found.append(attrs[name])
        if tag == "script" and not attrs.get("src") and attrs.get("type") != "application/json":
            self.inline_scripts += 1


@pytest.fixture
def client(tmp_path):
    app = create_app({"EBBTIDE_DB": str(tmp_path / "offline.db"), "EBBTIDE_STUDY": load_study(DEMO),
                      "EBBTIDE_SEED": 3, "EBBTIDE_PIN": PIN, "EBBTIDE_PUBLIC_URL": "http://127.0.0.1:8750"})
    client = app.test_client()
    assert client.post("/console/login", data={"pin": PIN}).status_code == 303
    client.secret = app.extensions["ebbtide"].current.keys[0].secret
    yield client
    app.extensions["ebbtide"].store.close()


def _get(client, path):
    response = client.get(path)
    body = response.get_data()
    status = response.status_code
    response.close()
    return status, body


def test_every_asset_a_page_names_is_served_by_the_app(client):
    pages = ["/play", f"/s/{client.secret}", "/console", "/console/cards", "/console/payments",
             "/console/login"]
    checked = set()
    for page in pages:
        status, body = _get(client, page)
        assert status == 200, page
        parser = _Assets()
        parser.feed(body.decode("utf-8"))
        assert parser.inline_scripts == 0, page  # the CSP forbids inline script: none may be needed
        for ref in parser.found:
            if ref.startswith("#"):
                continue  # a part of the same page (an SVG symbol), not a request
            assert ref.startswith("/") and not ref.startswith("//"), (page, ref)  # same laptop only
            checked.add(ref.split("#")[0])
    checked.add("/static/vendor/socket.io.min.js.map")  # named by the script's sourceMappingURL
    for ref in sorted(checked):
        status, body = _get(client, ref)
        assert status in (200, 302, 303), ref  # console links answer (or redirect within the laptop)
        if ref.startswith("/static/"):
            assert status == 200 and body, ref
    assert {"/static/ebbtide.css", "/static/field.css", "/static/console.js", "/static/phone.js",
            "/static/console-fallback.js", "/static/vendor/socket.io.min.js"} <= checked

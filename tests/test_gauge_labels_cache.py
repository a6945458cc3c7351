"""The gauge's words are looked up once per language, and each language keeps its own words.

Expected words are read from the message catalogues themselves with Babel's own .po reader
(``babel.messages.pofile.read_po``), not from the code under test.
"""

from __future__ import annotations

from babel.messages.pofile import read_po
from flask_babel import force_locale

from ebbtide.server import create_app
from ebbtide.server.phone.view import gauge_labels
from ebbtide.server.resources import data_folder


def catalogue_word(language: str, msgid: str) -> str:
    path = data_folder("translations") / language / "LC_MESSAGES" / "messages.po"
    with path.open("rb") as handle:
        return read_po(handle, locale=language)[msgid].string


def test_gauge_labels_cached_per_language_never_mixed(tmp_path):
    app = create_app({"EBBTIDE_DB": str(tmp_path / "labels.db")})
    seen = []
    with app.test_request_context():
        for language in ("en", "es", "fr", "en", "es"):  # cached after the first of each
            with force_locale(language):
                seen.append((language, gauge_labels()["stock"]))
    es, fr = catalogue_word("es", "Stock"), catalogue_word("fr", "Stock")
    assert seen == [("en", "Stock"), ("es", es), ("fr", fr), ("en", "Stock"), ("es", es)]
    assert catalogue_word("es", "Stock") != "Stock"  # the check above could tell the languages apart


def test_a_drawn_gauge_is_reused_only_for_the_same_picture(tmp_path):
    # Reference: the gauge drawn directly (pictures.gauge), with the catalogue's words.
    from ebbtide.server.phone.view import gauge_svg
    from ebbtide.server.pictures.gauge import stock_gauge_svg

    app = create_app({"EBBTIDE_DB": str(tmp_path / "gauges.db")})
    calm = {"stock": 60, "capacity": 100, "unit": "baskets", "danger": {"kind": "none"}}
    lower = {**calm, "stock": 59}
    exact = {**calm, "danger": {"kind": "exact", "level": 30, "recovery": 45}}
    with app.test_request_context():
        drawn = {}
        for language in ("en", "es", "en"):
            for name, view in (("calm", calm), ("lower", lower), ("exact", exact), ("calm", calm)):
                drawn[(language, name)] = gauge_svg(language, view, "stock")
                with force_locale(language):
                    direct = stock_gauge_svg(view, labels=gauge_labels(), id_prefix="stock")
                assert drawn[(language, name)] == direct
    assert len({drawn[("en", name)] for name in ("calm", "lower", "exact")}) == 3
    assert drawn[("en", "calm")] != drawn[("es", "calm")]

"""The language catalogues are complete: every msgid Babel extracts is translated in en and es.

Extraction uses Babel's own API with the project's ``babel.cfg`` over ``server/`` and
``templates/``, so a string added anywhere a participant or facilitator sees it
fails here until it is translated (run ``scripts/update-translations.sh``, translate,
run it again). French must be present and mostly complete.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from babel.messages.extract import extract_from_dir
from babel.messages.frontend import parse_mapping_cfg
from babel.messages.mofile import read_mo
from babel.messages.pofile import read_po

from ebbtide.game_logic.debrief import CAUTION

ROOT = Path(__file__).resolve().parent.parent
TRANSLATIONS = ROOT / "translations"
KEYWORDS = {"_": None, "gettext": None, "ngettext": (1, 2), "lazy_gettext": None}
FRENCH_AT_LEAST = 0.9  # "mostly complete": the facilitator's long cautions may lag behind


def extracted_msgids() -> set[str]:
    with open(ROOT / "babel.cfg", encoding="utf-8") as cfg:
        method_map, options_map = parse_mapping_cfg(cfg)
    ids = set()
    for _file, _line, message, _comments, _context in extract_from_dir(
        str(ROOT), method_map, options_map, keywords=KEYWORDS
    ):
        ids.add(message[0] if isinstance(message, tuple) else message)
    return ids


def catalogue(lang: str):
    with open(TRANSLATIONS / lang / "LC_MESSAGES" / "messages.po", "rb") as f:
        return read_po(f, locale=lang)


@pytest.fixture(scope="module")
def msgids() -> set[str]:
    ids = extracted_msgids()
    assert len(ids) > 150  # the extraction really ran over pages and server code
    return ids


def test_extraction_finds_phone_debrief_and_gauge_strings(msgids):
    assert {"How many will you take?", "Reveal to participants", "Danger level {level}",
            "Talk with your group", CAUTION} <= msgids


@pytest.mark.parametrize("lang", ["en", "es"])
def test_catalogue_translates_every_extracted_msgid(msgids, lang):
    cat = catalogue(lang)
    missing = sorted(m for m in msgids if m not in cat)
    empty = sorted(m for m in msgids if m in cat and not cat[m].string)
    fuzzy = sorted(m.id for m in cat if m.id and m.fuzzy)
    assert not missing, f"{lang}: msgids missing from the catalogue: {missing}"
    assert not empty, f"{lang}: msgids without a translation: {empty}"
    assert not fuzzy, f"{lang}: fuzzy (guessed) entries: {fuzzy}"


def test_english_catalogue_repeats_each_msgid(msgids):
    cat = catalogue("en")
    assert all(cat[m].string == m for m in msgids)


def test_french_catalogue_is_present_and_mostly_complete(msgids):
    cat = catalogue("fr")
    done = [m for m in msgids if m in cat and cat[m].string and not cat[m].fuzzy]
    assert len(done) / len(msgids) >= FRENCH_AT_LEAST


@pytest.mark.parametrize("lang", ["en", "es", "fr"])
def test_compiled_catalogue_matches_its_po_file(lang):
    # A fresh clone runs without a compile step, so the committed .mo must not lag the .po.
    with open(TRANSLATIONS / lang / "LC_MESSAGES" / "messages.mo", "rb") as f:
        compiled = read_mo(f)
    po = catalogue(lang)
    expected = {m.id: m.string for m in po if m.id and m.string and not m.fuzzy}
    got = {m.id: m.string for m in compiled if m.id}
    assert got == expected


@pytest.mark.parametrize("lang", ["es", "fr"])
def test_translations_keep_every_placeholder(lang):
    pattern = re.compile(r"%%?\(\w+\)s|\{\w+\}")
    for m in catalogue(lang):
        if m.id and m.string:
            assert sorted(pattern.findall(m.id)) == sorted(pattern.findall(m.string)), m.id

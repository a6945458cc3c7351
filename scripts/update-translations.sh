#!/usr/bin/env bash
# Re-extract every translatable string (babel.cfg: server/ and templates/), merge it into
# each catalogue, fill the English one (its text is the msgid) and compile the .mo files.
# New strings arrive empty in es and fr: translate them, then run this again.
# tests/test_i18n_catalogues.py fails on any string missing, empty or fuzzy in en or es.
set -euo pipefail
cd "$(dirname "$0")/.."

LANGS="en es fr"
POT=translations/messages.pot

pybabel extract -F babel.cfg -k _ -k gettext -k ngettext -k lazy_gettext \
  --add-location=file --sort-output --project=Ebbtide --copyright-holder="Ebbtide contributors" \
  -o "$POT" . >/dev/null

for lang in $LANGS; do
  po="translations/$lang/LC_MESSAGES/messages.po"
  if [ -f "$po" ]; then
    # No fuzzy matching: a guessed translation is worse than a visible gap.
    pybabel update -i "$POT" -d translations -l "$lang" --no-fuzzy-matching --ignore-obsolete >/dev/null
  else
    pybabel init -i "$POT" -d translations -l "$lang" >/dev/null
  fi
done

python - <<'PY'
# English is the source language: every msgstr is its msgid.
from babel.messages.pofile import read_po, write_po
path = "translations/en/LC_MESSAGES/messages.po"
with open(path, "rb") as f:
    catalog = read_po(f)
for message in catalog:
    if message.id and not message.string:
        message.string = message.id
with open(path, "wb") as f:
    write_po(f, catalog, include_previous=False, sort_output=True)
PY

pybabel compile -d translations --statistics

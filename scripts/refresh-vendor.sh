#!/usr/bin/env bash
# Refresh static/vendor/ from the npm registry's socket.io-client package, unmodified.
# The major version must speak the server's protocol: python-socketio 5 ↔ socket.io-client 4.
set -euo pipefail
cd "$(dirname "$0")/.."
VERSION="${1:-4}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
(cd "$work" && npm pack "socket.io-client@${VERSION}" >/dev/null && tar xzf socket.io-client-*.tgz)
cp "$work/package/dist/socket.io.min.js" "$work/package/dist/socket.io.min.js.map" static/vendor/
cp "$work/package/LICENSE" static/vendor/socket.io-client.LICENSE
grep -o '"version": *"[^"]*"' "$work/package/package.json" | head -1 > static/vendor/socket.io-client.VERSION
echo "static/vendor/ now holds socket.io-client $(cat static/vendor/socket.io-client.VERSION)"

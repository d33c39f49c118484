#!/usr/bin/env bash
# npm start: install npm dependencies when missing or stale, then run the start script.
set -euo pipefail
cd "$(dirname "$0")/.."
if [ ! -d node_modules ] || [ ! -f node_modules/.package-lock.json ] || [ package-lock.json -nt node_modules/.package-lock.json ]; then
  echo "Installing npm dependencies (npm ci)…"
  npm ci
fi
exec npx tsx scripts/start.ts "$@"

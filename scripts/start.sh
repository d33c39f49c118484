#!/usr/bin/env bash
# npm start: install npm dependencies when missing or stale, then run the start script.
set -euo pipefail
cd "$(dirname "$0")/.."
. scripts/lib/ensure-npm-deps.sh
exec npx tsx scripts/start.ts "$@"

#!/usr/bin/env bash
# npm test: install npm dependencies when missing or stale, then run every suite against a throwaway PostgreSQL.
set -euo pipefail
cd "$(dirname "$0")/.."
. scripts/lib/ensure-npm-deps.sh
exec npx tsx scripts/test.ts "$@"

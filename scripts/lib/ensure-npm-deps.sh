# Sourced by start.sh and test.sh: run `npm ci` when node_modules is missing or older than package-lock.json.
if [ ! -d node_modules ] || [ ! -f node_modules/.package-lock.json ] || [ package-lock.json -nt node_modules/.package-lock.json ]; then
  echo "Installing npm dependencies (npm ci)…"
  npm ci
fi

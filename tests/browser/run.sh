#!/usr/bin/env bash
# Browser tier: installs Debian's Chromium and ChromeDriver, starts wardcast on a loopback
# port with a fresh data folder, and runs the playwright-core tests against it.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)

if ! command -v chromium >/dev/null || ! command -v chromedriver >/dev/null; then
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq
  apt-get install -y -qq chromium chromium-driver >/dev/null
fi
(cd "$here" && npm ci --no-audit --no-fund --loglevel=error)

cd "$root"
# The same feature set as the workspace test build, so CI reuses its binary.
cargo test --workspace --no-run
port=${WARDCAST_TEST_PORT:-18787}
data=$(mktemp -d)
artifacts="$root/tests/artifacts/screens"
mkdir -p "$artifacts"
target_dir=$(cargo metadata --format-version 1 --no-deps | python3 -c 'import json,sys; print(json.load(sys.stdin)["target_directory"])')
"$target_dir/debug/wardcast" serve --port "$port" --data-dir "$data" > "$data/server.log" 2>&1 &
server=$!
trap 'kill $server 2>/dev/null || true; wait $server 2>/dev/null || true; rm -rf "$data"' EXIT
for _ in $(seq 1 100); do
  if curl -fsS -o /dev/null "http://127.0.0.1:$port/"; then break; fi
  sleep 0.2
done
curl -fsS -o /dev/null "http://127.0.0.1:$port/" || { cat "$data/server.log"; exit 1; }

cd "$here"
WARDCAST_URL="http://127.0.0.1:$port" WARDCAST_ARTIFACTS="$artifacts" WARDCAST_DEMO_DIR="$root/demo" \
  node --test --test-concurrency=1 tests/

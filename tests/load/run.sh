#!/usr/bin/env bash
# Load test on loopback: 50 concurrent clients for 30 seconds on the Soundness (checks) page of
# the fitted demo model, with wrk from Debian's packages. It fails on any error or non-2xx
# answer; it prints latency percentiles and never asserts on time.
#
# Usage: bash tests/load/run.sh [path]   (default path: /analyses/larkmoor/soundness)
# Environment: WARDCAST_BIN (a built wardcast binary; default: the workspace's debug build),
# WARDCAST_LOAD_PORT (default 18788), WARDCAST_LOAD_SECONDS (default 30),
# WARDCAST_LOAD_CLIENTS (default 50).
set -euo pipefail

here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
path=${1:-/analyses/larkmoor/soundness}
port=${WARDCAST_LOAD_PORT:-18788}
seconds=${WARDCAST_LOAD_SECONDS:-30}
clients=${WARDCAST_LOAD_CLIENTS:-50}

if ! command -v wrk >/dev/null; then
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq
  apt-get install -y -qq wrk >/dev/null
fi

cd "$root"
bin=${WARDCAST_BIN:-}
if [ -z "$bin" ]; then
  # The same feature set as the workspace test build, so CI reuses its binary.
  cargo test --workspace --no-run
  target_dir=$(cargo metadata --format-version 1 --no-deps | python3 -c 'import json,sys; print(json.load(sys.stdin)["target_directory"])')
  bin="$target_dir/debug/wardcast"
fi

data=$(mktemp -d)
"$bin" serve --port "$port" --data-dir "$data" > "$data/server.log" 2>&1 &
server=$!
trap 'kill $server 2>/dev/null || true; wait $server 2>/dev/null || true; rm -rf "$data"' EXIT
for _ in $(seq 1 150); do
  if curl -fs -o /dev/null "http://127.0.0.1:$port/"; then break; fi
  sleep 0.2
done
# One request first, so the page is known to work and its diagnostics are computed.
curl -fsS -o /dev/null "http://127.0.0.1:$port$path" || { cat "$data/server.log"; exit 1; }

out="$data/wrk.txt"
wrk -t2 -c"$clients" -d"${seconds}s" --timeout 10s --latency "http://127.0.0.1:$port$path" | tee "$out"

# wrk reports transport errors on a "Socket errors" line and other statuses on a
# "Non-2xx or 3xx responses" line; either means the run failed.
if grep -q "Socket errors" "$out" || grep -q "Non-2xx or 3xx responses" "$out"; then
  echo "load test: errors under load" >&2
  exit 1
fi
requests=$(awk '/requests in/ {print $1}' "$out")
if [ -z "$requests" ] || [ "$requests" -eq 0 ]; then
  echo "load test: no request completed" >&2
  exit 1
fi
p50=$(awk '$1 == "50%" {print $2}' "$out")
p99=$(awk '$1 == "99%" {print $2}' "$out")
echo "load test: $requests requests, $clients clients, ${seconds} s, 0 errors; p50 $p50, p99 $p99 (GET $path)"

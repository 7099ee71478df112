#!/usr/bin/env bash
# Makes docs/lif-voltage-series.png, the figure in the README: the tube-voltage series of the demo scenario
# (LiF batch 7 on the copper-anode unit, 12–30 kV) taken on the simulator with a fixed seed, drawn against photon
# energy. Usage: docs/make-demo-plot.sh [OUTPUT.png|svg]
set -euo pipefail
cd "$(dirname "$0")/.."
out=${1:-docs/lif-voltage-series.png}
tmp=$(mktemp -d)
pid=""
cleanup() { [ -n "$pid" ] && kill "$pid" 2>/dev/null; rm -rf "$tmp"; }
trap cleanup EXIT

go build -o "$tmp/" ./cmd/goniod ./cmd/gonio
freeport() { python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1",0)); print(s.getsockname()[1]); s.close()'; }
addr=127.0.0.1:$(freeport)
"$tmp/goniod" --sim --sim-seed 7 --sim-speed 2000 --data "$tmp/data" --listen "$addr" \
  --metrics-listen "127.0.0.1:$(freeport)" >"$tmp/goniod.log" 2>&1 &
pid=$!
gonio() { "$tmp/gonio" --addr "$addr" "$@"; }
for _ in $(seq 100); do gonio status >/dev/null 2>&1 && break; sleep 0.1; done

ids=$(gonio scan coupled --from 4 --to 30 --step 0.1 --dwell 1s --series-kv 12,15,20,25,30 --ma 0.8 \
  --label "LiF batch 7" --detach)
for id in $ids; do gonio watch "$id" --output json >/dev/null; done
# shellcheck disable=SC2086 # one argument per scan ID
gonio plot $ids --x energy --log -o "$out"

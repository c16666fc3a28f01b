#!/usr/bin/env bash
# Soak: 64 concurrent clients against one sightfix-server for 5 minutes, good calls mixed with
# bad ones (undecodable images, NaN priors, unknown calibrations, garbage frames, lengths over
# the cap, frames cut short). Passes when the server never dies, answers every call the way it
# should, its RSS grows at most 10 % after a 60 s warm-up, it holds no more descriptors after
# the clients leave than before they came, and the last window's p99 locate latency is within
# 1.5 x of the first window after warm-up. Not part of CI's default run (it takes 5 minutes).
# --tls: a CA, a server certificate and one vehicle certificate per client (scripts/make-certs.sh,
#   in BUILD_DIR/soak/pki), the query port on TLS and a share per client (--client-calls-per-s:
#   one call per shortest think time, burst 3, so a client that thinks is never limited).
# --attack (implies --tls): the run is three phases of --seconds each, the same clients in all:
#   unloaded; attacked, by a handshake flooder from 127.0.0.2 (half without a certificate, half
#   full handshakes with a vehicle's, each then closed) and a query flooder with its own
#   certificate (Locates back to back, 64 in flight, no retries); control, a burner taking the
#   CPU the flooders took (the soak's own process, attacked less unloaded) without the network.
#   The flooders share the server's cores here, which an attacker on the radio link does not:
#   the control phase holds that share equal. Passes when the clients' p99 Locate latency
#   attacked is within 1.5 x of control (attacked / unloaded is printed beside it), none of
#   their calls failed, the flooder was answered RATE_LIMITED, the handshake limits closed and
#   refused the flood (/metrics and the log), and the server drained.
# --handshake-rate R: passes --handshake-rate-per-address R to a server that has it (0: off).
# --flood-block-s S: passes --flood-block-s S to a server that has it (0: never block).
# --no-build: use the programs already in BUILD_DIR.
# Usage: scripts/soak.sh [--clients N] [--seconds S] [--think-ms MS] [--tls] [--attack]
#          [--handshake-rate R] [--flood-block-s S] [--no-build]   (BUILD_DIR overrides ./build)
#   quick check: scripts/soak.sh --tls --attack --clients 16 --seconds 60
# Output: one line per 30 s window and a JSON verdict, also in BUILD_DIR/soak/.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
clients=64 seconds=300 think_ms=8000 tls=0 attack=0 handshake_rate="" flood_block="" build_first=1
while [ $# -gt 0 ]; do
  case "$1" in
    --clients) clients="$2"; shift 2 ;;
    --seconds) seconds="$2"; shift 2 ;;
    --think-ms) think_ms="$2"; shift 2 ;;
    --tls) tls=1; shift ;;
    --attack) attack=1 tls=1; shift ;;
    --handshake-rate) handshake_rate="$2"; shift 2 ;;
    --flood-block-s) flood_block="$2"; shift 2 ;;
    --no-build) build_first=0; shift ;;
    -h|--help) sed -n '2,27p' "$0" | sed 's/^# \{0,1\}//'; exit 0 ;;
    *) echo "soak.sh: unknown option $1 (see --help)" >&2; exit 2 ;;
  esac
done
if [ "$build_first" = 1 ]; then
  bash "$root/scripts/deps.sh"
  cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo >/dev/null
  cmake --build "$build" -j "$(nproc)" --target sightfix-server sightfix-indexer \
    sightfix-demo-route soak_load
fi
out="$build/soak"

make_pki() {  # DIR CLIENTS: a CA, the server and one vehicle per client, each made once
  local dir="$1" n="$2" certs="$root/scripts/make-certs.sh" name
  [ -f "$dir/ca.crt" ] || bash "$certs" "$dir" ca >/dev/null
  [ -f "$dir/localhost.crt" ] ||
    bash "$certs" "$dir" server localhost DNS:localhost IP:127.0.0.1 >/dev/null
  for name in soak-query-flooder soak-handshaker $(seq -f 'soak-client-%g' 0 $((n - 1))); do
    [ -f "$dir/$name.crt" ] || bash "$certs" "$dir" vehicle "$name" >/dev/null
  done
}

refusal_reasons() {  # LOG: the TLS refusals the server logged, by source address and reason
  echo "soak: TLS refusals logged (a server may log one refusal a while per address), by reason:"
  grep -o '"peer":"[0-9.]*:[0-9]*","tls_refused":"[^"(:]*' "$1" |
    sed -E 's/"peer":"([0-9.]*):[0-9]*","tls_refused":"(.*)/\1  \2/' | sort | uniq -c |
    sort -rn | sed 's/^/  /' || true
}
mkdir -p "$out"
data="$out/data"
if [ ! -f "$data/map/catalog.sqlite" ]; then
  echo "soak: making a 150 m demo town and its map (once)"
  bash "$root/tests/service/make_map.sh" "$build" "$data"
fi
server=("$build/server/sightfix-server" --map "$data/map" --listen 127.0.0.1:0 --workers "$(nproc)"
  --queue 64 --max-connections 256)
load=()
if [ "$tls" = 1 ]; then
  make_pki "$out/pki" "$clients"
  # A client calls at most once per shortest think (think_ms / 2): that rate refills its bucket
  # as fast as it spends it, and the burst of 3 is slack; a flooder gets that rate and no more.
  share="$(awk -v t="$think_ms" 'BEGIN { printf "%.3f", 2000 / t }')"
  server+=(--http 127.0.0.1:0 --tls-cert "$out/pki/localhost.crt" --tls-key "$out/pki/localhost.key"
    --tls-client-ca "$out/pki/ca.crt" --client-calls-per-s "$share" --client-burst 3)
  load+=(--tls-dir "$out/pki")
else
  server+=(--http "")
fi
if [ -n "$handshake_rate" ]; then
  grep -q -- --handshake-rate-per-address <<<"$("${server[0]}" --help)" ||
    { echo "soak: this sightfix-server has no --handshake-rate-per-address" >&2; exit 2; }
  server+=(--handshake-rate-per-address "$handshake_rate")
fi
if [ -n "$flood_block" ]; then
  grep -q -- --flood-block-s <<<"$("${server[0]}" --help)" ||
    { echo "soak: this sightfix-server has no --flood-block-s" >&2; exit 2; }
  server+=(--flood-block-s "$flood_block")
fi
"${server[@]}" 2>"$out/server.log" &
pid=$!
trap 'kill "$pid" 2>/dev/null || true' EXIT
source "$root/tests/lib/server_port.sh"
read -r port http_port <<<"$(serving_port "$out/server.log" "$pid" || true)"
[ -n "${port:-}" ] ||
  { echo "soak: the server did not start: $(tail -3 "$out/server.log")" >&2; exit 1; }
[ "$attack" = 1 ] && load+=(--attack --metrics "127.0.0.1:$http_port")
what="$clients clients for $seconds s"
[ "$attack" = 1 ] && what="$what unloaded, $seconds s attacked, then $seconds s control"
[ "$tls" = 1 ] && what="$what, TLS (a share of $share calls/s and a burst of 3 per vehicle;" &&
  what="$what handshakes a second per address: ${handshake_rate:-as the server defaults};" &&
  what="$what flood block: ${flood_block:-as the server defaults} s)"
echo "soak: $what; server pid $pid, port $port"
rc=0
"$build/tests/soak_load" --server "127.0.0.1:$port" --pid "$pid" --drive "$data/town/query-day" \
  --clients "$clients" --seconds "$seconds" --think-ms "$think_ms" "${load[@]}" |
  tee "$out/soak.txt" || rc=$?
[ "$tls" = 1 ] && refusal_reasons "$out/server.log"
kill -TERM "$pid"
if wait "$pid"; then echo "soak: the server drained and exited 0"; else echo "soak: server exit $?" >&2; rc=1; fi
trap - EXIT
echo "soak: verdict $( [ $rc -eq 0 ] && echo PASS || echo FAIL ); log $out/server.log"
exit $rc

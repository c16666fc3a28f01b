#!/usr/bin/env bash
# Faults on disk, on a copy of the service tests' small map (two tiles: west 18/101944/95320,
# east 18/101945/95320):
# - a tile truncated, a byte flipped, a tile missing: sightfix-server starts, keeps serving the
#   healthy tile (same answers as on the whole map), answers queries over the bad one without
#   failing, and names the bad tile in /healthz and in Describe; `verify` names it too;
# - the map held by another writer: a second `add` is refused at once and names the holder;
#   the catalog locked by another SQLite connection: `add` fails after its busy timeout with a
#   clear error, the server keeps serving and a reload keeps the old map;
# - a full disk during `add`: a file-size limit (RLIMIT_FSIZE: the kernel fails the write with
#   EFBIG) and, where mounting is allowed, a small tmpfs (ENOSPC): `add` fails with a clear
#   error and the map is byte for byte what it was (no new or temporary file left).
# Usage: disk_faults_test.sh BUILD_DIR SERVICE_DATA_DIR
set -u
build="$1" data="$2"
idx="$build/indexer/sightfix-indexer"
cli="$build/client/sightfix"
server_bin="$build/server/sightfix-server"
town="$data/town"
server_pid="" holder_pid="" mounted=""
cleanup_extra() {
  [ -n "$server_pid" ] && kill "$server_pid" 2>/dev/null
  [ -n "$holder_pid" ] && kill "$holder_pid" 2>/dev/null
  [ -n "$mounted" ] && umount "$mounted" 2>/dev/null
  wait 2>/dev/null
}
source "$(dirname "$0")/../lib/checks.sh"
source "$(dirname "$0")/../lib/server_port.sh"
west=18/101944/95320 east=18/101945/95320
q="$town/query-overcast"

start_server() {  # MAPDIR: starts sightfix-server on free ports, sets port/http_port
  : >"$tmp/server.log"
  "$server_bin" --map "$1" --listen 127.0.0.1:0 --http 127.0.0.1:0 --workers 2 2>"$tmp/server.log" &
  server_pid=$!
  local ports
  ports="$(serving_port "$tmp/server.log" "$server_pid")" || return 1
  read -r port http_port <<<"$ports"
}
stop_server() { kill -TERM "$server_pid" 2>/dev/null; wait "$server_pid" 2>/dev/null; server_pid=""; }
# /healthz once every tile is checked: "CODE\nBODY".
health() {
  "$py" - "$http_port" <<'PY'
import sys, time, urllib.request, urllib.error
url = f"http://127.0.0.1:{sys.argv[1]}/healthz"
for _ in range(100):
    try:
        r = urllib.request.urlopen(url, timeout=5); code, body = r.status, r.read().decode()
    except urllib.error.HTTPError as e:
        code, body = e.code, e.read().decode()
    first = body.splitlines()[0]
    if "(2 of 2 tiles checked)" in first:
        break
    time.sleep(0.1)
print(code); print(body, end="")
PY
}
# Answer to query image I (with a 40 m prior at its true position) from --map M or --server.
answer() {  # SOURCE_ARGS... -- IMAGE_NUMBER
  local n="${*: -1}" args=("${@:1:$#-1}")
  local row; row="$(awk -F, -v img="images/$n.jpg" '$1 == img { print $3 "," $4 }' "$q/drive.csv")"
  "$cli" locate "${args[@]}" --image "$q/images/$n.jpg" --camera "$q/camera.yml" \
    --prior "$row,40" --json 2>"$tmp/locate.err" |
    "$py" -c 'import json,sys; j=json.load(sys.stdin); print(j["quality"], round(j.get("lat",0),9), round(j.get("lon",0),9))'
}
# Query images: three over the east tile, one over the west tile.
east_q=$(awk -F, 'NR > 1 && $4 > -39.99975 { sub("images/", "", $1); sub(".jpg", "", $1); print $1 }' "$q/drive.csv" | sed -n '1p;8p;16p')
west_q=$(awk -F, 'NR > 1 && $4 < -39.99986 { sub("images/", "", $1); sub(".jpg", "", $1); print $1 }' "$q/drive.csv" | sed -n '1p')
cp -r "$data/map" "$tmp/whole"
for n in $east_q; do answer --map "$tmp/whole" "$n"; done >"$tmp/whole.east"
[ "$(grep -c refined "$tmp/whole.east")" -ge 2 ] && ok "whole map: east queries refined" || bad "whole map east answers: $(cat "$tmp/whole.east")"

for fault in truncated flipped missing; do
  rm -rf "$tmp/m" && cp -r "$tmp/whole" "$tmp/m"
  victim="$(ls "$tmp/m/tiles/$west"*)"
  case $fault in
    truncated) truncate -s $(($(stat -c %s "$victim") / 2)) "$victim"; want="damaged" ;;
    flipped) printf '\x5a' | dd of="$victim" bs=1 seek=4000 conv=notrunc 2>/dev/null; want="damaged" ;;
    missing) rm "$victim"; want="missing" ;;
  esac
  if ! start_server "$tmp/m"; then bad "$fault: server did not start: $(tail -3 "$tmp/server.log")"; continue; fi
  ok "$fault west tile: the server starts"
  h="$(health)"
  [ "$(echo "$h" | head -1)" = 200 ] && echo "$h" | grep -q "^degraded: 1 of 2 tiles unusable" &&
    echo "$h" | grep -q "^$west .*$want" && ok "$fault: /healthz 200, degraded, names $west ($want)" ||
    bad "$fault: /healthz: $h"
  "$cli" describe --server "127.0.0.1:$port" --json >"$tmp/describe.json" 2>&1
  "$py" - "$tmp/describe.json" "$west" "$want" <<'PY' && ok "$fault: Describe names the bad tile" || bad "$fault: describe: $(cat "$tmp/describe.json")"
import json, sys
j = json.load(open(sys.argv[1]))
assert [b["tile"] for b in j["bad_tiles"]] == [sys.argv[2]], j
assert sys.argv[3] in j["bad_tiles"][0]["reason"], j
assert j["tiles_checked"] == 2
PY
  for n in $east_q; do answer --server "127.0.0.1:$port" "$n"; done >"$tmp/srv.east"
  cmp -s "$tmp/whole.east" "$tmp/srv.east" && ok "$fault: healthy east tile answers as on the whole map" ||
    bad "$fault: east answers $(cat "$tmp/srv.east") vs $(cat "$tmp/whole.east")"
  w="$(answer --server "127.0.0.1:$port" "$west_q")"
  [ -n "$w" ] && ok "$fault: a query over the bad tile is answered ($w), not failed" || bad "$fault: west query: $(cat "$tmp/locate.err")"
  grep -q '"event":"tile_skipped","tile":"'"$west"'"' "$tmp/server.log" && ok "$fault: the log names the skipped tile" || bad "$fault: log"
  kill -0 "$server_pid" 2>/dev/null && ok "$fault: server still up" || bad "$fault: server died"
  stop_server
  "$idx" verify --map "$tmp/m" >"$tmp/verify.txt" 2>&1; rc=$?
  [ $rc -eq 1 ] && grep -q "$(basename "$victim")" "$tmp/verify.txt" && ok "$fault: verify names the tile, exit 1" ||
    bad "$fault: verify (exit $rc): $(cat "$tmp/verify.txt")"
done

# A drive for `add` over the east tile (its rows east of -39.99983).
mkdir -p "$tmp/east"
cp "$town/query-day/camera.yml" "$tmp/east/" && cp -r "$town/query-day/images" "$tmp/east/"
awk -F, 'NR == 1 || $4 > -39.99983' "$town/query-day/drive.csv" >"$tmp/east/drive.csv"
snapshot() { (cd "$1" && find . -type f ! -name .writer.lock | sort | xargs sha256sum); }

# Another writer holds the map: a second add is refused at once and names it.
rm -rf "$tmp/m" && cp -r "$tmp/whole" "$tmp/m"
"$idx" add --drive "$tmp/east" --map "$tmp/m" --quiet >/dev/null 2>&1 &
holder_pid=$!
# Wait (up to 60 s: a loaded machine starts it slowly) until the first add holds the lock.
for _ in $(seq 1 1200); do grep -q "pid $holder_pid" "$tmp/m/.writer.lock" 2>/dev/null && break; sleep 0.05; done
grep -q "pid $holder_pid" "$tmp/m/.writer.lock" && ok "the first add holds the writer lock" || bad "the first add never took the lock"
t0=$(date +%s%N)
"$idx" add --drive "$tmp/east" --map "$tmp/m" --quiet >"$tmp/second.txt" 2>&1; rc=$?
ms=$((($(date +%s%N) - t0) / 1000000))
kill -0 "$holder_pid" 2>/dev/null && still=yes || still=no
[ $rc -ne 0 ] && grep -q "being written by another process (pid $holder_pid since" "$tmp/second.txt" && [ $still = yes ] &&
  ok "a second add while one runs: refused in $ms ms (exit $rc), names pid $holder_pid" ||
  bad "second writer (exit $rc, first still running: $still): $(cat "$tmp/second.txt")"
wait "$holder_pid"; rc=$?; holder_pid=""
[ $rc -eq 0 ] && "$idx" verify --map "$tmp/m" >/dev/null 2>&1 &&
  [ "$("$idx" inspect --map "$tmp/m" --json | "$py" -c 'import json,sys; print(json.load(sys.stdin)["map_version"])')" = 2 ] &&
  ok "the first writer finished: version 2, verifies" || bad "first writer (exit $rc)"

# The catalog locked by another SQLite connection (an operator's shell holding a transaction).
rm -rf "$tmp/m" && cp -r "$tmp/whole" "$tmp/m"
snapshot "$tmp/m" >"$tmp/before.sum"
start_server "$tmp/m" || bad "server on the locked map did not start"
"$py" - "$tmp/m/catalog.sqlite" "$tmp/locked" <<'PY' &
import sqlite3, sys, time, pathlib
db = sqlite3.connect(sys.argv[1], isolation_level=None)
db.execute("BEGIN EXCLUSIVE")
pathlib.Path(sys.argv[2]).touch()
time.sleep(60)
PY
holder_pid=$!
for _ in $(seq 1 100); do [ -e "$tmp/locked" ] && break; sleep 0.05; done
"$idx" add --drive "$tmp/east" --map "$tmp/m" --quiet >"$tmp/lockedadd.txt" 2>&1; rc=$?
[ $rc -ne 0 ] && grep -q "database is locked" "$tmp/lockedadd.txt" && ok "add with the catalog locked: clear error (exit $rc)" ||
  bad "add with a locked catalog (exit $rc): $(cat "$tmp/lockedadd.txt")"
kill -HUP "$server_pid"
for _ in $(seq 1 100); do grep -q '"event":"reload' "$tmp/server.log" && break; sleep 0.1; done
grep -q '"event":"reload_failed"' "$tmp/server.log" && ok "reload with the catalog locked fails and says so" || bad "reload: $(tail -2 "$tmp/server.log")"
n="$(echo "$east_q" | head -1)"
[ "$(answer --server "127.0.0.1:$port" "$n")" = "$(head -1 "$tmp/whole.east")" ] && ok "the server keeps serving the old map" || bad "serving after failed reload"
kill "$holder_pid"; wait "$holder_pid" 2>/dev/null; holder_pid=""
stop_server
snapshot "$tmp/m" | cmp -s - "$tmp/before.sum" && ok "locked catalog: the map is byte for byte unchanged" || bad "map changed"

# A full disk during add, 1: the kernel's file-size limit (EFBIG on the write that crosses it).
rm -rf "$tmp/m" && cp -r "$tmp/whole" "$tmp/m"
snapshot "$tmp/m" >"$tmp/before.sum"
(trap '' XFSZ; ulimit -f 4096; exec "$idx" add --drive "$tmp/east" --map "$tmp/m" --quiet) >"$tmp/full.txt" 2>&1; rc=$?
[ $rc -ne 0 ] && grep -Eqi "full|too large|i/o error" "$tmp/full.txt" && ok "add past a 4 MiB file-size limit: clear error (exit $rc): $(head -1 "$tmp/full.txt" | cut -c1-160)" ||
  bad "add under a file-size limit (exit $rc): $(cat "$tmp/full.txt")"
snapshot "$tmp/m" | cmp -s - "$tmp/before.sum" && ok "file-size limit: the map is byte for byte what it was, nothing left behind" ||
  bad "map changed after a failed add: $(snapshot "$tmp/m" | diff - "$tmp/before.sum" | head -5)"
"$idx" verify --map "$tmp/m" >/dev/null 2>&1 && ok "file-size limit: the map verifies" || bad "verify after a failed add"

# A full disk during add, 2: a tmpfs with 8 MiB free beyond the map (ENOSPC), where mounting is allowed.
mkdir -p "$tmp/small"
size_kb=$(($(du -sk "$tmp/whole" | cut -f1) + 8192))
if mount -t tmpfs -o size=${size_kb}k tmpfs "$tmp/small" 2>/dev/null; then
  mounted="$tmp/small"
  cp -r "$tmp/whole" "$tmp/small/m"
  snapshot "$tmp/small/m" >"$tmp/before.sum"
  "$idx" add --drive "$tmp/east" --map "$tmp/small/m" --quiet >"$tmp/enospc.txt" 2>&1; rc=$?
  [ $rc -ne 0 ] && grep -qi "full" "$tmp/enospc.txt" && ok "add on a full tmpfs: clear error (exit $rc): $(head -1 "$tmp/enospc.txt" | cut -c1-160)" ||
    bad "add on a full tmpfs (exit $rc): $(cat "$tmp/enospc.txt")"
  snapshot "$tmp/small/m" | cmp -s - "$tmp/before.sum" && ok "full tmpfs: the map is byte for byte what it was" || bad "map changed on full tmpfs"
  "$idx" verify --map "$tmp/small/m" >/dev/null 2>&1 && ok "full tmpfs: the map verifies" || bad "verify on full tmpfs"
  umount "$tmp/small" && mounted=""
else
  echo "skip full tmpfs: mounting is not allowed here (the file-size limit above covers the write failure)"
fi

finish

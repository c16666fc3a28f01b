#!/usr/bin/env bash
# sightfix fit-integrity end to end on the service tests' small demo map (a copy: the fit writes
# into it): the README example runs; the record lands in the catalog as the command printed it
# and `inspect` shows it; the engine applies it (every protection level of the same fix grows by
# exactly K, in process and through a server, and the fix names the drive); replay says whether
# its drive is held out from the fit; bad flags, too few fixes, a held writer lock and a corrupt
# record are refused, and a refused or dry run leaves the catalog's bytes as they were. Guards
# the engine's use of the fit (tests/mutants/mutants.tsv: overbound_fit_ignored).
# Usage: fit_integrity_test.sh BUILD_DIR SERVICE_DATA_DIR
set -u
build="$1" data="$2"
cli="$build/client/sightfix" idx="$build/indexer/sightfix-indexer"
src="$(cd "$(dirname "$0")/../.." && pwd)"
server_pid="" lock_pid=""
cleanup_extra() {
  [ -n "$server_pid" ] && kill "$server_pid" 2>/dev/null
  [ -n "$lock_pid" ] && kill "$lock_pid" 2>/dev/null
  wait 2>/dev/null
}
source "$(dirname "$0")/../lib/checks.sh"
source "$(dirname "$0")/../lib/server_port.sh"
map="$tmp/map" town="$data/town"
cp -r "$data/map" "$map" && rm -f "$map/.writer.lock"
img="$town/query-day/images/000005.jpg" cam="$town/query-day/camera.yml"
sha() { sha256sum "$map/catalog.sqlite" | cut -d' ' -f1; }
field() { "$py" -c "import json, sys; j = json.load(open(sys.argv[1])); print($2)" "$1"; }

echo "== refused, the map untouched"
before="$(sha)"
expect "needs --drive" 2 "needs --map and --drive" -- "$cli" fit-integrity --map "$map"
expect "no map" 2 "no map in" -- "$cli" fit-integrity --map "$tmp/none" --drive "$town/query-day"
expect "--prior gnss refused" 2 "none or noisy" -- \
  "$cli" fit-integrity --map "$map" --drive "$town/query-day" --prior gnss
expect "--seed without a noisy prior refused" 2 "--seed applies" -- \
  "$cli" fit-integrity --map "$map" --drive "$town/query-day" --prior none --seed 2
expect "--confidence 1 refused" 2 "confidence must lie" -- \
  "$cli" fit-integrity --map "$map" --drive "$town/query-day" --confidence 1
expect "--wrong-m 0 refused" 2 "wrong-m must be" -- \
  "$cli" fit-integrity --map "$map" --drive "$town/query-day" --wrong-m 0
expect "too few fixes refused" 1 "a fit needs at least 20" -- \
  "$cli" fit-integrity --map "$map" --drive "$town/query-day" --limit 8
mkdir -p "$tmp/no-images" && cp "$town/query-day/drive.csv" "$town/query-day/camera.yml" "$tmp/no-images/"
expect "a drive without its images: the failed queries named" 1 "queries failed, the first: .*cannot read" -- \
  "$cli" fit-integrity --map "$map" --drive "$tmp/no-images" --limit 30
"$py" -c 'import fcntl, sys, time
f = open(sys.argv[1], "a"); fcntl.flock(f, fcntl.LOCK_EX); print("held", flush=True); time.sleep(60)' \
  "$map/.writer.lock" >"$tmp/lock.out" &
lock_pid=$!
for _ in $(seq 50); do grep -q held "$tmp/lock.out" && break; sleep 0.1; done
expect "a held writer lock refuses the fit" 1 "being written by another process" -- \
  "$cli" fit-integrity --map "$map" --drive "$town/query-overcast"
kill "$lock_pid" 2>/dev/null; wait "$lock_pid" 2>/dev/null; lock_pid=""
expect "--dry-run prints the fit" 0 "dry run: the map is unchanged" -- \
  "$cli" fit-integrity --map "$map" --drive "$town/query-overcast" --dry-run
[ "$(sha)" = "$before" ] && ok "catalog bytes unchanged by refusals and the dry run" ||
  bad "the catalog changed"
expect "inspect before: none fitted" 0 "integrity overbound: none fitted" -- "$idx" inspect --map "$map"

echo "== the README example"
example="$(grep -m1 -- "sightfix fit-integrity --map r41/map" "$src/README.md")"
case "$example" in
  *"--drive r41/town/"*) ok "README example found" ;;
  *) bad "README example found (got '$example')" ;;
esac
example="${example//build\//$build/}"
example="${example//r41\/map/$map}"
example="${example//r41\/town/$town}"
if eval "$example" >"$tmp/fit.txt" 2>"$tmp/fit.err"; then ok "README example runs"; else
  bad "README example runs ($(tail -3 "$tmp/fit.err"))"
fi
grep -q "overbound scale K = " "$tmp/fit.txt" && grep -q "recorded in" "$tmp/fit.txt" &&
  ok "it prints K and where it went" || bad "fit output: $(head -5 "$tmp/fit.txt")"
fitted_drive="$(echo "$example" | sed -E 's/.*--drive [^ ]*\/([^ /]+).*/\1/')"
"$idx" inspect --map "$map" --json >"$tmp/inspect.json"
k="$(field "$tmp/inspect.json" 'j["integrity_fit"]["overbound_scale"]')"
[ "$(field "$tmp/inspect.json" 'j["integrity_fit"]["drive"]')" = "$fitted_drive" ] &&
  ok "inspect: fitted on $fitted_drive, K $k" || bad "inspect: $(field "$tmp/inspect.json" 'j["integrity_fit"]')"
grep -q "overbound scale K = $(printf '%.3f' "$k")" "$tmp/fit.txt" && ok "record holds the printed K" ||
  bad "record K $k vs $(grep 'overbound scale' "$tmp/fit.txt")"
expect "inspect text names the fit" 0 "integrity overbound: .* fitted on drive $fitted_drive" -- \
  "$idx" inspect --map "$map"

echo "== the engine applies it"
# ratio FILE_BEFORE FILE_AFTER WANT: every protection level of one fix grows by exactly WANT
# (protection_levels.cc multiplies every sigma by the scale).
ratio() {
  "$py" - "$1" "$2" "$3" <<'PY'
import json, sys
a, b, want = json.load(open(sys.argv[1]))["integrity"], json.load(open(sys.argv[2]))["integrity"], float(sys.argv[3])
keys = ("horizontal_pl_m", "lateral_pl_m", "longitudinal_pl_m")
bad = [k for k in keys if abs(b[k] / a[k] - want) > 1e-6 * want]
print("ok" if not bad and a["overbound_scale"] == 1 and abs(b["overbound_scale"] - want) < 1e-9 else "bad %s %s" % (a, b))
PY
}
"$cli" locate --map "$data/map" --image "$img" --camera "$cam" --json >"$tmp/before.json"
"$cli" locate --map "$map" --image "$img" --camera "$cam" --json >"$tmp/after.json"
[ "$(ratio "$tmp/before.json" "$tmp/after.json" "$k")" = ok ] && ok "levels x $k in process" ||
  bad "levels x $k: $(ratio "$tmp/before.json" "$tmp/after.json" "$k")"
[ "$(field "$tmp/after.json" 'j["integrity"].get("overbound_drive")')" = "$fitted_drive" ] &&
  ok "the fix names the drive" || bad "fix: $(field "$tmp/after.json" 'j["integrity"]')"
# A larger K written into the record: the fit's own K may be close to 1 on so clean a town.
"$py" - "$map/catalog.sqlite" <<'PY'
import json, sqlite3, sys
db = sqlite3.connect(sys.argv[1])
fit = json.loads(db.execute("SELECT value FROM meta WHERE key = 'integrity_fit'").fetchone()[0])
fit["overbound_scale"] = 2.5
db.execute("UPDATE meta SET value = ? WHERE key = 'integrity_fit'", (json.dumps(fit),))
db.commit()
PY
"$cli" locate --map "$map" --image "$img" --camera "$cam" --json >"$tmp/k25.json"
[ "$(ratio "$tmp/before.json" "$tmp/k25.json" 2.5)" = ok ] && ok "levels x 2.5 in process" ||
  bad "levels x 2.5: $(ratio "$tmp/before.json" "$tmp/k25.json" 2.5)"
expect "locate text names the overbound" 0 "overbound 2.50 fitted on drive $fitted_drive" -- \
  "$cli" locate --map "$map" --image "$img" --camera "$cam"
"$build/server/sightfix-server" --map "$map" --listen 127.0.0.1:0 --http "" 2>"$tmp/server.log" &
server_pid=$!
port="$(serving_port "$tmp/server.log" "$server_pid")"
"$cli" locate --server "127.0.0.1:$port" --image "$img" --camera "$cam" --json >"$tmp/wire.json"
[ "$(ratio "$tmp/before.json" "$tmp/wire.json" 2.5)" = ok ] &&
  [ "$(field "$tmp/wire.json" 'j["integrity"].get("overbound_drive")')" = "$fitted_drive" ] &&
  ok "through the server: levels x 2.5, drive named" || bad "wire: $(field "$tmp/wire.json" 'j["integrity"]')"
kill "$server_pid" 2>/dev/null; wait "$server_pid" 2>/dev/null; server_pid=""

echo "== replay says whether its drive is held out"
"$cli" replay --map "$map" --drive "$town/query-day" --prior none --limit 6 --out "$tmp/day" \
  >"$tmp/day.txt" 2>&1
[ "$(field "$tmp/day/summary.json" 'j["integrity"]["protection"]["overbound_held_out"]')" = True ] &&
  grep -q "held out from the fit" "$tmp/day.txt" && ok "query-day: held out" ||
  bad "query-day: $(grep overbound "$tmp/day.txt")"
"$cli" replay --map "$map" --drive "$town/$fitted_drive" --prior none --limit 6 --out "$tmp/own" \
  >"$tmp/own.txt" 2>&1
[ "$(field "$tmp/own/summary.json" 'j["integrity"]["protection"]["overbound_held_out"]')" = False ] &&
  grep -q "THIS drive" "$tmp/own.txt" && ok "$fitted_drive: not held out, said so" ||
  bad "$fitted_drive: $(grep overbound "$tmp/own.txt")"
grep -q "not held-out evidence" "$tmp/own/report.html" && ok "report.html says so too" ||
  bad "report.html lacks the overbound line"

echo "== a corrupt record is refused, not read as no fit"
"$py" - "$map/catalog.sqlite" <<'PY'
import sqlite3, sys
db = sqlite3.connect(sys.argv[1])
db.execute("UPDATE meta SET value = '{\"overbound_scale\": 0.5, \"drive\": \"x\"}' WHERE key = 'integrity_fit'")
db.commit()
PY
expect "locate refuses a scale below 1" 2 "integrity_fit" -- \
  "$cli" locate --map "$map" --image "$img" --camera "$cam"
finish

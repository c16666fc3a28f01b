#!/usr/bin/env bash
# Every documented option of every sightfix command (`sightfix COMMAND --help`) is either
# honoured, with an effect seen in the output, or refused with a clear error and exit 2 where it
# would have no effect (a server-only flag with --map, --method with --server, --seed without a
# noisy prior). Runs on the service tests' small demo map, in process and through a
# sightfix-server with a token, one worker and a queue of one.
# Usage: cli_options_test.sh BUILD_DIR SERVICE_DATA_DIR
set -u
build="$1" data="$2"
cli="$build/client/sightfix"
server_pid=""
cleanup_extra() { [ -n "$server_pid" ] && kill "$server_pid" 2>/dev/null; wait 2>/dev/null; }
source "$(dirname "$0")/../lib/checks.sh"
source "$(dirname "$0")/../lib/server_port.sh"
map="$data/map" drive="$data/town/query-day"
img="$drive/images/000005.jpg" img2="$drive/images/000006.jpg" cam="$drive/camera.yml"
truth="$(awk -F, 'NR == 7 { print $3 "," $4 }' "$drive/drive.csv")"  # the row of 000005.jpg

# field FILE PYTHON_EXPR: prints the expression over the JSON in FILE (bound to j).
field() { "$py" -c "import json, sys; j = json.load(open(sys.argv[1])); print($2)" "$1"; }

echo "== refused where they would have no effect"
loc=(locate --image "$img" --camera "$cam")
expect "locate --map --token-file: refused" 2 "--token-file applies to --server only" -- \
  "$cli" "${loc[@]}" --map "$map" --token-file "$tmp/none.token"
expect "locate --map --deadline-ms: refused" 2 "--deadline-ms applies to --server only" -- \
  "$cli" "${loc[@]}" --map "$map" --deadline-ms 500
expect "locate --server --method: refused" 2 "--method applies to --map only" -- \
  "$cli" "${loc[@]}" --server 127.0.0.1:1 --method pair
expect "replay --map --token-file: refused" 2 "--token-file applies to --server only" -- \
  "$cli" replay --map "$map" --drive "$drive" --out "$tmp/x" --token-file "$tmp/none.token"
expect "replay --map --deadline-ms: refused" 2 "--deadline-ms applies to --server only" -- \
  "$cli" replay --map "$map" --drive "$drive" --out "$tmp/x" --deadline-ms 500
expect "replay --seed with --prior none: refused" 2 "--seed applies to --prior noisy:R only" -- \
  "$cli" replay --map "$map" --drive "$drive" --out "$tmp/x" --prior none --seed 3
expect "replay --seed with --prior gnss: refused" 2 "--seed applies to --prior noisy:R only" -- \
  "$cli" replay --map "$map" --drive "$drive" --out "$tmp/x" --prior gnss --seed 3
[ ! -e "$tmp/x" ] && ok "a refused replay writes no report" || bad "a refused replay wrote $tmp/x"

echo "== locate in process: --map --image --camera --prior --heading --method --truth --json"
expect "locate -h" 0 "--method arg" -- "$cli" locate -h
expect "locate --map: a refined fix in text" 0 "^refined fix (points)" -- "$cli" "${loc[@]}" --map "$map"
expect "locate --truth: the error against it" 0 "error against truth: [0-9.]* m" -- \
  "$cli" "${loc[@]}" --map "$map" --truth "$truth"
"$cli" "${loc[@]}" --map "$map" --json --truth "$truth" --prior "$truth,40" >"$tmp/prior.json" 2>&1
[ "$(field "$tmp/prior.json" '"prior_distance_m" in j and "error_m" in j and j["quality"]')" = refined ] &&
  ok "locate --json --prior --truth: prior_distance_m and error_m in the JSON" || bad "locate --prior: $(head -3 "$tmp/prior.json")"
expect "locate --method pair: the pair method answers" 0 '"method": "pair"' -- \
  "$cli" "${loc[@]}" --map "$map" --method pair --json
expect "locate --method points: the points method answers" 0 '"method": "points"' -- \
  "$cli" "${loc[@]}" --map "$map" --method points --json
expect "locate --heading 90 (the drive's): a fix" 0 '"quality": "refined"' -- \
  "$cli" "${loc[@]}" --map "$map" --heading 90 --json
expect "locate --heading 270 (facing away): no fix, exit 3" 3 '"quality": "none"' -- \
  "$cli" "${loc[@]}" --map "$map" --heading 270 --json
expect "locate --map: the integrity line in text" 0 "^integrity: usable, protection levels" -- \
  "$cli" "${loc[@]}" --map "$map"
expect "locate --alert-limits 0.001: protection levels over it, not usable" 0 \
  '"state": "over_alert_limit"' -- "$cli" "${loc[@]}" --map "$map" --alert-limits 0.001 --json
expect "locate --alert-limits with two numbers: refused" 2 "alert-limits must look like" -- \
  "$cli" "${loc[@]}" --map "$map" --alert-limits 1,2
expect "locate --alert-limits -1: refused" 2 "alert limits must be finite and >= 0" -- \
  "$cli" "${loc[@]}" --map "$map" --alert-limits -1
expect "locate --integrity-risk 0.7: refused" 2 "integrity_risk must lie in" -- \
  "$cli" "${loc[@]}" --map "$map" --integrity-risk 0.7

echo "== pair: IMAGE_A IMAGE_B --camera --camera-b --json"
expect "pair IMAGE_A IMAGE_B --camera: a relative pose in text" 0 "^rotation [0-9.]* deg" -- \
  "$cli" pair "$img" "$img2" --camera "$cam"
"$cli" pair --image-a "$img" --image-b "$img2" --camera "$cam" --json >"$tmp/pair-a.json" 2>&1
sed 's/\[ 500\., 0\., /[ 800., 0., /; s/0\., 500\.,/0., 800.,/' "$cam" >"$tmp/cam-b.yml"
"$cli" pair "$img" "$img2" --camera "$cam" --camera-b "$tmp/cam-b.yml" --json >"$tmp/pair-b.json" 2>&1
"$py" - "$tmp/pair-a.json" "$tmp/pair-b.json" <<'PY' && ok "pair --json --camera-b: B's calibration changes the pose" || bad "pair --camera-b: $(head -3 "$tmp/pair-b.json")"
import json, sys
a, b = (json.load(open(p)) for p in sys.argv[1:3])
assert a["inliers"] > 0 and "rotation_deg" in a, a
assert abs(a["rotation_deg"] - b.get("rotation_deg", -1)) > 1e-6 or a["inliers"] != b["inliers"], (a, b)
PY
expect "pair --camera-b missing: its error" 2 "cannot open calibration file" -- \
  "$cli" pair "$img" "$img2" --camera "$cam" --camera-b "$tmp/none.yml"

echo "== replay in process: --drive --out --limit --prior --seed --gnss --spoofing --jobs --json"
echo "   --alert-limits"
replay() { "$cli" replay --map "$map" --drive "$drive" --limit 4 "$@" 2>/dev/null; }
replay --out "$tmp/r1" --seed 1 --jobs 1 >"$tmp/r1.txt" && grep -Eq "^pose fine \(0.25 m, 2 deg\): [0-9.]+ \[[0-9.]+, [0-9.]+\]( (seg|W))? of queries" "$tmp/r1.txt" &&
  ok "replay --out --limit --seed --jobs: text summary with the pose bins" || bad "replay: $(head -3 "$tmp/r1.txt")"
[ "$(field "$tmp/r1/summary.json" 'j["queries"], j["source"].split()[0], j["seed"]')" = "4 map 1" ] &&
  ok "replay --limit 4: 4 queries from the map, seed 1" || bad "replay --limit: $(field "$tmp/r1/summary.json" 'j["queries"]')"
replay --out "$tmp/r2" --seed 2 --json >"$tmp/r2.json"
[ "$(field "$tmp/r2.json" 'j["queries"], j["seed"]')" = "4 2" ] && ok "replay --json: summary.json on stdout" || bad "replay --json"
! cmp -s <(cut -d, -f19-20 "$tmp/r1/fixes.csv") <(cut -d, -f19-20 "$tmp/r2/fixes.csv") &&
  ok "replay --seed: other prior centres" || bad "replay --seed: same prior centres"
replay --out "$tmp/r3" --prior noisy:60 >/dev/null
[ "$(cut -d, -f21 "$tmp/r3/fixes.csv" | sort -u | grep -v prior)" = "60.00" ] && ok "replay --prior noisy:60: 60 m circles" || bad "noisy:60"
replay --out "$tmp/r4" --prior none >/dev/null
[ "$(cut -d, -f19-21 "$tmp/r4/fixes.csv" | sort -u | grep -v prior)" = ",," ] && ok "replay --prior none: no prior" || bad "prior none"
awk -F, 'BEGIN { OFS = "," } NR > 1 { $5 = "3.00" } { print }' "$drive/gnss.csv" >"$tmp/gnss3.csv"
replay --out "$tmp/r5" --prior gnss --gnss "$tmp/gnss3.csv" >/dev/null
[ "$(cut -d, -f21 "$tmp/r5/fixes.csv" | sort -u | grep -v prior)" = "7.34" ] &&
  ok "replay --gnss FILE: its claimed sigma (3 m x 2.4477) sizes the prior" || bad "--gnss: $(cut -d, -f21 "$tmp/r5/fixes.csv" | sort -u)"
head -1 "$drive/spoofing.csv" >"$tmp/nospoof.csv"
replay --out "$tmp/r6" --spoofing "$tmp/nospoof.csv" --prior none >/dev/null
replay --out "$tmp/r7" --prior none >/dev/null
[ "$(field "$tmp/r6/summary.json" 'j["spoofing"]["truth_known"]')" = False ] &&
  [ "$(field "$tmp/r7/summary.json" 'j["spoofing"]["truth_known"]')" = True ] &&
  ok "replay --spoofing FILE: its spans replace the drive's" || bad "--spoofing"
replay --out "$tmp/r8" --prior none --alert-limits 7 >"$tmp/r8.txt"
[ "$(field "$tmp/r8/summary.json" 'j["integrity"]["protection"]["alert_limit_checked_m"]')" = 7.0 ] &&
  [ "$(field "$tmp/r7/summary.json" 'j["integrity"]["protection"]["alert_limit_checked_m"]')" = 2.0 ] &&
  ok "replay --alert-limits 7: every fix judged at 7 m (the map's 2 m without it)" || bad "--alert-limits"
grep -q "5 m <= " "$tmp/r8.txt" && bad "replay --alert-limits 7: 5 m marked an upper bound" ||
  ok "replay --alert-limits 7: availability at 5 m exact"
expect "replay --alert-limits 1,2: refused" 2 "alert-limits must look like" -- \
  "$cli" replay --map "$map" --drive "$drive" --out "$tmp/x" --alert-limits 1,2

echo "== compare: REPORTDIR_A REPORTDIR_B (or --a --b)"
expect "compare A B: the bins named, B - A" 0 "within_0_25m_2deg (pose fine)" -- "$cli" compare "$tmp/r1" "$tmp/r2"
expect "compare --a --b: seed differs by +1" 0 "^seed .*+1" -- "$cli" compare --a "$tmp/r1" --b "$tmp/r2"

echo "== through a server: --server --token-file --deadline-ms --jobs; describe"
token="$(head -c 24 /dev/urandom | od -An -tx1 | tr -d ' \n')"
printf '%s\n' "$token" >"$tmp/server.token"
"$build/server/sightfix-server" --map "$map" --listen 127.0.0.1:0 --http "" --workers 1 --queue 1 \
  --token-file "$tmp/server.token" 2>"$tmp/server.log" &
server_pid=$!
port="$(serving_port "$tmp/server.log" "$server_pid")"
[ -n "$port" ] && ok "server started" || bad "server: $(tail -3 "$tmp/server.log")"
srv=(--server "127.0.0.1:$port" --token-file "$tmp/server.token")
expect "describe --server --token-file: text" 0 "map version [0-9]" -- "$cli" describe "${srv[@]}"
expect "describe --json" 0 '"map_version"' -- "$cli" describe "${srv[@]}" --json
expect "describe without --token-file: refused by the server" 1 "UNAUTHENTICATED" -- \
  "$cli" describe --server "127.0.0.1:$port"
expect "locate --server A,B: fails over from a dead replica" 0 "^refined fix (points)" -- \
  "$cli" "${loc[@]}" --server "127.0.0.1:1,127.0.0.1:$port" --token-file "$tmp/server.token"
"$cli" "${loc[@]}" "${srv[@]}" --json --truth "$truth" --prior "$truth,40" >"$tmp/srv-prior.json" 2>&1
[ "$(field "$tmp/srv-prior.json" '"prior_distance_m" in j and "error_m" in j and j["quality"]')" = refined ] &&
  ok "locate --server --prior --truth: the prior reaches the server" || bad "server prior: $(head -3 "$tmp/srv-prior.json")"
# The query camera as the server's pose estimated it, through the wire: its focal length within a
# few of its sigmas of the supplied one (the service data's camera.yml is exact), sigma > 0.
[ "$(field "$tmp/srv-prior.json" 'abs(j["query_camera"]["focal_scale"]) < 4 * j["query_camera"]["focal_scale_sigma"] and j["query_camera"]["focal_scale_sigma"] > 0')" = True ] &&
  ok "locate --server --json: query_camera crosses the wire" || bad "query_camera: $(head -c 400 "$tmp/srv-prior.json")"
# The integrity request reaches the server (a tighter risk: larger levels; its lateral limit is
# judged) and the answer's integrity crosses back.
"$cli" "${loc[@]}" "${srv[@]}" --json --integrity-risk 1e-7 --alert-limits 5,0.0001,5 \
  >"$tmp/srv-integrity.json" 2>&1
[ "$(field "$tmp/srv-integrity.json" 'j["integrity"]["state"] == "over_alert_limit" and j["integrity"]["integrity_risk"] == 1e-7 and j["integrity"]["lateral_alert_limit_m"] == 0.0001 and j["integrity"]["hypotheses"] > 0 and j["integrity"]["lateral_pl_m"] > 0')" = True ] &&
  ok "locate --server --integrity-risk --alert-limits: the request and the integrity cross the wire" ||
  bad "server integrity: $(head -c 600 "$tmp/srv-integrity.json")"
expect "locate --server --heading 270: the heading reaches the server" 3 '"quality": "none"' -- \
  "$cli" "${loc[@]}" "${srv[@]}" --heading 270 --json
expect "locate --deadline-ms 1: the call runs out of time" 2 "deadline\|DEADLINE" -- \
  "$cli" "${loc[@]}" "${srv[@]}" --deadline-ms 1
"$cli" replay "${srv[@]}" --drive "$drive" --out "$tmp/s1" --limit 4 --jobs 1 --json >"$tmp/s1.json" 2>/dev/null
[ "$(field "$tmp/s1.json" 'j["queries"], j["failed_calls"], j["source"].split()[0]')" = "4 0 server" ] &&
  ok "replay --server --token-file --jobs 1: one call at a time, none refused" || bad "replay --jobs 1: $(head -c 300 "$tmp/s1.json")"
"$cli" replay "${srv[@]}" --drive "$drive" --out "$tmp/s4" --limit 8 --jobs 4 --json >"$tmp/s4.json" 2>/dev/null
[ "$(field "$tmp/s4.json" 'j["failed_calls"] > 0')" = True ] && grep -q OVERLOADED "$tmp/s4/fixes.csv" &&
  ok "replay --jobs 4: four calls in flight overflow a one-worker, one-slot server" || bad "replay --jobs 4: $(head -c 300 "$tmp/s4.json")"
"$cli" replay "${srv[@]}" --drive "$drive" --out "$tmp/s5" --limit 2 --jobs 1 --deadline-ms 1 --json \
  >"$tmp/s5.json" 2>/dev/null
[ "$(field "$tmp/s5.json" 'j["failed_calls"]')" = 2 ] && ok "replay --deadline-ms 1: every call runs out of time" ||
  bad "replay --deadline-ms: $(head -c 300 "$tmp/s5.json")"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""

finish

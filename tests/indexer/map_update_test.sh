#!/usr/bin/env bash
# sightfix-indexer add / retrain / verify / inspect / coverage on the service tests' small map.
# (Kills and I/O errors in the middle of an add or a retrain are map_crash_test's, injected
# through the Env.) Also: bad inputs name file and line, --skip-bad counts them, nothing is
# written without it; --jobs 1 and 2 give byte-identical tiles.
# Usage: map_update_test.sh BUILD_DIR SERVICE_DATA_DIR
set -u
build="$1" data="$2"
idx="$build/indexer/sightfix-indexer"
cli="$build/client/sightfix"
town="$data/town"
source "$(dirname "$0")/../lib/checks.sh"

# Answers of a map to three query images (quality and position, no timings).
answers() {
  for i in 000004 000012 000020; do
    "$cli" locate --map "$1" --image "$town/query-overcast/images/$i.jpg" \
      --camera "$town/query-overcast/camera.yml" --json 2>/dev/null |
      "$py" -c 'import json,sys; j=json.load(sys.stdin); print(j["quality"], round(j.get("lat",0),10), round(j.get("lon",0),10))'
  done
}

cp -r "$data/map" "$tmp/base"
answers "$tmp/base" >"$tmp/base.answers"
grep -q refined "$tmp/base.answers" && ok "base map answers" || bad "base map answers: $(cat "$tmp/base.answers")"

# A new drive lying in the east tile only (the map has two, split at -39.999847): the query-day
# rows east of -39.99983.
mkdir -p "$tmp/east"
cp "$town/query-day/camera.yml" "$tmp/east/"
cp -r "$town/query-day/images" "$tmp/east/"
awk -F, 'NR == 1 || $4 > -39.99983' "$town/query-day/drive.csv" >"$tmp/east/drive.csv"
rows=$(($(wc -l <"$tmp/east/drive.csv") - 1))
[ "$rows" -ge 3 ] && ok "east drive has $rows rows" || bad "east drive has $rows rows"

# A whole add: version 2, the new drive listed, only the touched tile rewritten.
"$idx" add --drive "$tmp/east" --map "$tmp/base" --quiet --json >"$tmp/add.json" 2>"$tmp/add.err" \
  && ok "add" || bad "add: $(tail -3 "$tmp/add.err")"
"$idx" verify --map "$tmp/base" >/dev/null && ok "map verifies after add" || bad "verify after add"
"$idx" inspect --map "$tmp/base" --json >"$tmp/inspect.json"
"$py" - "$tmp/inspect.json" "$rows" <<'PY' && ok "inspect: version 2, images grew by the drive, two drives" || bad "inspect after add: $(head -c 600 "$tmp/inspect.json")"
import json, sys
j = json.load(open(sys.argv[1]))
assert j["map_version"] == 2, j["map_version"]
assert j["images"] == 150 + int(sys.argv[2]), j["images"]
assert len(j["drives"]["drives"]) == 2, j["drives"]
for k in ("global_code", "local_features", "points"):
    assert j["bytes_per_image"][k] > 0
PY
v1=$(find "$tmp/base/tiles" -name '*-v1.sqlite' | wc -l); v2=$(find "$tmp/base/tiles" -name '*-v2.sqlite' | wc -l)
[ "$v1" -ge 1 ] && [ "$v2" -ge 1 ] && ok "only touched tiles rewritten ($v2 at version 2, $v1 kept at version 1)" \
  || bad "tile versions after add: v1 $v1, v2 $v2"
answers "$tmp/base" >"$tmp/add.answers"
grep -q refined "$tmp/add.answers" && ok "map answers after add" || bad "answers after add"

# retrain.
"$idx" retrain --map "$tmp/base" --quiet --json >"$tmp/retrain.json" 2>&1 && ok "retrain" || bad "retrain: $(tail -3 "$tmp/retrain.json")"
"$idx" verify --map "$tmp/base" >/dev/null && ok "map verifies after retrain" || bad "verify after retrain"
[ "$(find "$tmp/base/tiles" -name '*.sqlite' | grep -vc -- '-v3.sqlite')" -eq 0 ] \
  && ok "retrain rewrote every tile (all at version 3, old ones removed)" || bad "tile versions after retrain"
answers "$tmp/base" >"$tmp/retrain.answers"
grep -q refined "$tmp/retrain.answers" && ok "map answers after retrain" || bad "answers after retrain"

# coverage GeoJSON.
"$idx" coverage --map "$tmp/base" --out "$tmp/cov.geojson" >/dev/null && "$py" - "$tmp/cov.geojson" <<'PY' && ok "coverage: tile polygons closed and counterclockwise, survey tracks" || bad "coverage"
import json, sys
j = json.load(open(sys.argv[1]))
assert j["type"] == "FeatureCollection"
tiles = [f for f in j["features"] if f["properties"]["kind"] == "tile"]
tracks = [f for f in j["features"] if f["properties"]["kind"] == "survey_track"]
assert tiles and tracks
for f in tiles:
    ring = f["geometry"]["coordinates"][0]
    assert ring[0] == ring[-1] and len(ring) == 5
    area2 = sum(x0 * y1 - x1 * y0 for (x0, y0), (x1, y1) in zip(ring, ring[1:]))
    assert area2 > 0  # RFC 7946 3.1.6: exterior rings counterclockwise
PY

# verify names a damaged tile and exits 1.
rm -rf "$tmp/d" && cp -r "$tmp/base" "$tmp/d"
victim="$(find "$tmp/d/tiles" -name '*.sqlite' | sort | head -1)"
printf 'X' | dd of="$victim" bs=1 seek=200 conv=notrunc 2>/dev/null
"$idx" verify --map "$tmp/d" >"$tmp/dverify.txt" 2>&1; rc=$?
[ $rc -eq 1 ] && grep -q "BAD .*$(basename "$victim")" "$tmp/dverify.txt" && ok "verify names the damaged tile, exit 1" \
  || bad "verify on damaged map (exit $rc): $(cat "$tmp/dverify.txt")"
rm -f "$(find "$tmp/d/tiles" -name '*.sqlite' | sort | tail -1)"
"$idx" verify --map "$tmp/d" | grep -q "missing" && ok "verify names a missing tile" || bad "missing tile"

# Bad inputs: file and line named, nothing written; --skip-bad counts them.
mkdir -p "$tmp/badsurvey"
cp "$town/survey/camera.yml" "$tmp/badsurvey/"
cp -r "$town/survey/images" "$tmp/badsurvey/"
# Row 5: NaN latitude; row 9: row 7's image again; row 11: an image that does not exist;
# row 13: a calibration of another size (the overcast camera, 720x540); row 15: a time before
# row 14's.
cp "$town/query-overcast/camera.yml" "$tmp/badsurvey/other.yml"
awk -F, -v OFS=, 'NR == 3 { t3 = $2 } NR == 7 { img7 = $1 } NR == 5 { $3 = "NaN" }
                  NR == 9 { $1 = img7 } NR == 11 { $1 = "images/nothere.jpg" }
                  NR == 13 { $9 = "other.yml" } NR == 15 { $2 = t3 } { print }' \
  "$town/survey/drive.csv" >"$tmp/badsurvey/drive.csv"
"$idx" build --drive "$tmp/badsurvey" --map "$tmp/badmap" --quiet >"$tmp/bad.txt" 2>&1; rc=$?
[ $rc -eq 2 ] && grep -q "drive.csv:5:" "$tmp/bad.txt" && [ ! -e "$tmp/badmap/catalog.sqlite" ] \
  && ok "a NaN coordinate names drive.csv:5, exit 2, nothing written" || bad "bad row (exit $rc): $(cat "$tmp/bad.txt")"
"$idx" build --drive "$tmp/badsurvey" --map "$tmp/badmap" --quiet --skip-bad --json >"$tmp/skip.json" 2>"$tmp/skip.err"; rc=$?
"$py" - "$tmp/skip.json" <<'PY' && [ $rc -eq 0 ] && ok "--skip-bad: 5 bad rows (NaN, duplicate, missing image, calibration size, time order) named and counted" || bad "--skip-bad (exit $rc): $(cat "$tmp/skip.err" | tail -5)"
import json, sys
j = json.load(open(sys.argv[1]))
assert j["skipped"] == 5, j["skipped_rows"]
text = " ".join(j["skipped_rows"])
for line in (5, 9, 11, 13, 15):
    assert f"drive.csv:{line}:" in text, (line, text)
assert "nothere.jpg" in text and "the same image as" in text and "out of order" in text, text
PY

# Determinism: the same survey with --jobs 1 and --jobs 2 gives byte-identical tiles.
for j in 1 2; do
  "$idx" build --drive "$town/survey" --map "$tmp/jobs$j" --zoom 18 --jobs $j --quiet >/dev/null 2>&1
  (cd "$tmp/jobs$j" && find tiles -type f | sort | xargs sha256sum) >"$tmp/jobs$j.sum"
done
[ -s "$tmp/jobs1.sum" ] && cmp -s "$tmp/jobs1.sum" "$tmp/jobs2.sum" \
  && ok "--jobs 1 and --jobs 2: byte-identical tiles ($(wc -l <"$tmp/jobs1.sum") files)" \
  || bad "tiles differ between --jobs 1 and 2: $(diff "$tmp/jobs1.sum" "$tmp/jobs2.sum" | head -4)"

finish

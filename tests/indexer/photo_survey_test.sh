#!/usr/bin/env bash
# The demo town's survey as a mapping team might have it: EXIF-tagged JPEGs and JPEGs with times
# plus a GPX track (sightfix-demo-route --export), and a two-camera rig with an INS log made from
# it. Maps built from each answer the day query drive like the drive.csv map does (the service
# tests' map of the same seed).
# Usage: photo_survey_test.sh BUILD_DIR SERVICE_DATA_DIR
set -u
build="$1" data="$2"
idx="$build/indexer/sightfix-indexer"
cli="$build/client/sightfix"
source "$(dirname "$0")/../lib/checks.sh"

"$build/demo_route/sightfix-demo-route" --out "$tmp/town" --seed 17 --route-length-m 150 --world clean \
  --export exif,gpx >/dev/null 2>&1 && ok "demo town exported as EXIF and GPX" || bad "export"
cmp -s "$tmp/town/survey/drive.csv" "$data/town/survey/drive.csv" \
  && ok "same survey as the service tests' map" || bad "survey differs from the fixture's"
[ "$(ls "$tmp/town/survey-exif/images" | wc -l)" -eq "$(ls "$tmp/town/survey/images" | wc -l)" ] \
  && [ -s "$tmp/town/survey-gpx/track.gpx" ] && ok "survey-exif/ and survey-gpx/ written" || bad "export folders"

# A two-camera rig from the same survey: even frames from camera "left", odd from "right" (each
# with its own calibration file, zero mounting), poses from an INS log made of the survey's poses.
rig="$tmp/town/survey-rig"
mkdir -p "$rig"
cp -r "$tmp/town/survey/images" "$rig/"
cp "$tmp/town/survey/camera.yml" "$rig/left.yml"
cp "$tmp/town/survey/camera.yml" "$rig/right.yml"
awk -F, -v OFS=, 'NR == 1 { print "timestamp,lat,lon,height,heading_deg,pitch_deg,roll_deg,sigma_h_m"; next }
                  { print $2, $3, $4, $5, $6, $7, $8, $10 }' "$tmp/town/survey/drive.csv" >"$rig/ins.csv"
for side in left right; do
  awk -F, -v OFS=, -v want="$side" 'NR == 1 { print "image,timestamp"; next }
    { side = (NR % 2 == 0) ? "left" : "right"; if (side == want) print $1, $2 }' \
    "$tmp/town/survey/drive.csv" >"$rig/$side.csv"
done
cat >"$rig/rig.yml" <<'YML'
%YAML:1.0
---
ins: ins.csv
cameras:
  - name: left
    calibration: left.yml
    images: left.csv
    lever_arm_m: [ 0.0, 0.0, 0.0 ]
    boresight_deg: [ 0.0, 0.0, 0.0 ]
    time_offset_s: 0.0
  - name: right
    calibration: right.yml
    images: right.csv
    lever_arm_m: [ 0.0, 0.0, 0.0 ]
    boresight_deg: [ 0.0, 0.0, 0.0 ]
    time_offset_s: 0.0
YML

for form in exif gpx rig; do
  "$idx" build --drive "$tmp/town/survey-$form" --map "$tmp/map-$form" --zoom 18 --quiet --json \
    >"$tmp/build-$form.json" 2>"$tmp/build-$form.err" && ok "build from the $form survey" \
    || bad "build $form: $(tail -3 "$tmp/build-$form.err")"
done
# The query drive with its exact camera.yml saying so (exact_camera, tests/lib/checks.sh).
mkdir -p "$tmp/query-day"
for f in "$data/town/query-day"/*; do [ "$(basename "$f")" = camera.yml ] || ln -s "$f" "$tmp/query-day/"; done
exact_camera "$data/town/query-day/camera.yml" "$tmp/query-day/camera.yml"
for form in drive exif gpx rig; do
  map="$tmp/map-$form"
  [ "$form" = drive ] && map="$data/map"
  "$cli" replay --map "$map" --drive "$tmp/query-day" --out "$tmp/rep-$form" --limit 24 \
    --seed 5 >/dev/null 2>&1 || bad "replay on the $form map"
done
"$py" - "$tmp" <<'PY' && ok "EXIF, GPX and two-camera rig maps answer like the drive.csv map" || bad "EXIF/GPX/rig maps differ from the drive map"
import json, sys
t = sys.argv[1]
s = {f: json.load(open(f"{t}/rep-{f}/summary.json")) for f in ("drive", "exif", "gpx", "rig")}
for f in ("exif", "gpx", "rig"):
    b = json.load(open(f"{t}/build-{f}.json"))
    assert b["input_format"] == f and b["skipped"] == 0, b
for f, j in s.items():
    r = j["refined_only"]
    print(f"{f:5s} availability {j['availability']:.3f} refined {j['refined']} median {r['median_error_m']:.3f} m "
          f"p95 {r['p95_error_m']:.3f} m wrong {j['wrong_refined']} coverage {j['radius95_coverage']:.3f}")
d = s["drive"]
for f in ("exif", "gpx", "rig"):
    j = s[f]
    assert j["wrong_refined"] == 0, f
    assert j["refined"] >= d["refined"] - 1, (f, j["refined"], d["refined"])
    # Survey poses without pitch and roll: the adjusted map may differ by centimetres.
    assert j["refined_only"]["median_error_m"] <= d["refined_only"]["median_error_m"] + 0.05, f
PY
finish

#!/usr/bin/env bash
# Command-line behaviour a user meets first: --help, bad flags, missing files. Each check prints
# "ok" or "FAIL"; the script exits non-zero if any failed.
# Usage: cli_test.sh BUILD_DIR
set -u
build="$1"
demo="$build/demo_route/sightfix-demo-route"
cli="$build/client/sightfix"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
passed=0 failed=0

check() {  # check NAME EXPECTED_EXIT PATTERN -- COMMAND...
  local name="$1" want="$2" pattern="$3"
  shift 4
  local out rc
  out="$("$@" 2>&1)"
  rc=$?
  if [ "$rc" -eq "$want" ] && printf '%s' "$out" | grep -q -- "$pattern"; then
    passed=$((passed + 1)); echo "ok   $name"
  else
    failed=$((failed + 1)); echo "FAIL $name (exit $rc, want $want; output: $(printf '%s' "$out" | head -3))"
  fi
}

check "demo --help" 0 "route-length-m" -- "$demo" --help
check "demo needs --out" 2 "--out is required" -- "$demo"
check "demo bad image size" 2 "must look like 640x480" -- "$demo" --out "$tmp/x" --image-size big
check "demo size out of range" 2 "image-size must be between" -- "$demo" --out "$tmp/x" --image-size 10x10
check "demo unknown flag" 2 "unrecognised option" -- "$demo" --out "$tmp/x" --colour red
check "demo route too short" 2 "route-length-m must be within" -- "$demo" --out "$tmp/x" --route-length-m 5
check "sightfix usage names the safety caution" 0 "not a certified navigation source" -- "$cli" --help
check "sightfix unknown command" 2 "unknown command 'fly'" -- "$cli" fly
check "pair --help" 0 "translation" -- "$cli" pair --help
check "pair needs a camera" 2 "needs IMAGE_A IMAGE_B and --camera" -- "$cli" pair a.jpg b.jpg
check "pair missing calibration" 2 "cannot open calibration file" -- "$cli" pair a.jpg b.jpg --camera "$tmp/none.yml"
printf '%%YAML:1.0\n---\nimage_width: 64\nimage_height: 48\ncamera_matrix: !!opencv-matrix\n   rows: 3\n   cols: 3\n   dt: d\n   data: [ 50., 0., 32., 0., 50., 24., 0., 0., 1. ]\n' > "$tmp/cam.yml"
check "pair undecodable image" 2 "cannot read or decode image" -- "$cli" pair "$tmp/cam.yml" "$tmp/cam.yml" --camera "$tmp/cam.yml"
check "replay --help names the prior modes" 0 "noisy:R" -- "$cli" replay --help
check "replay --help names the safety caution" 0 "not a certified navigation source" -- "$cli" replay --help
check "replay needs a source" 2 "replay needs --map or --server" -- "$cli" replay --drive "$tmp" --out "$tmp/r"
check "replay missing drive" 2 "cannot open drive manifest" -- "$cli" replay --map "$tmp" --drive "$tmp/none" --out "$tmp/r"
check "compare needs two folders" 2 "compare needs two report folders" -- "$cli" compare "$tmp"

indexer="$build/indexer/sightfix-indexer"
check "indexer --help" 0 "build --drive DIR --map MAPDIR" -- "$indexer" --help
check "indexer build --help" 0 "max-features" -- "$indexer" build --help
check "indexer unknown command" 2 "unknown command 'fly'" -- "$indexer" fly
check "indexer build needs flags" 2 "needs --drive DIR and --map MAPDIR" -- "$indexer" build
check "indexer add --help" 0 "tiles its frames fall in" -- "$indexer" add --help
check "indexer build --help names the forms" 0 "exif" -- "$indexer" build --help
check "indexer bad --format" 2 "format must be" -- "$indexer" build --drive "$tmp" --map "$tmp/m" --format tiff
check "indexer inspect without a map" 2 "no map in" -- "$indexer" inspect --map "$tmp/nomap"
check "indexer verify without a map" 1 "NOT whole" -- "$indexer" verify --map "$tmp/nomap"
check "indexer retrain without a map" 1 "no map in" -- "$indexer" retrain --map "$tmp/nomap"
check "indexer coverage needs --out" 2 "needs --map MAPDIR and --out" -- "$indexer" coverage --map "$tmp/nomap"
check "indexer missing drive" 2 "no survey folder" -- "$indexer" build --drive "$tmp/nodrive" --map "$tmp/map" --quiet
mkdir -p "$tmp/drive"
cp "$tmp/cam.yml" "$tmp/drive/camera.yml"
echo "image,timestamp,lat,lon,height,heading_deg,pitch_deg,roll_deg,camera,sigma_h_m" > "$tmp/drive/drive.csv"
for i in $(seq 10 49); do
  echo "images/$i.jpg,2026-05-04T12:00:$i.000Z,44.0001$i,-40.0,41.5,90,0,0,camera.yml,0.02" >> "$tmp/drive/drive.csv"
done
check "indexer names the bad row" 2 "drive.csv:2: cannot read or decode image" -- "$indexer" build --drive "$tmp/drive" --map "$tmp/map" --quiet
check "indexer wrote nothing" 0 "absent" -- bash -c "test -e '$tmp/map/catalog.sqlite' || echo absent"
check "indexer bad zoom" 2 "zoom must be within" -- "$indexer" build --drive "$tmp/drive" --map "$tmp/map" --zoom 3
check "locate --help" 0 "prior LAT,LON,RADIUS_M" -- "$cli" locate --help
check "locate --help names the safety caution" 0 "not a certified navigation source" -- "$cli" locate --help
check "locate needs flags" 2 "needs --map or --server, --image and --camera" -- "$cli" locate --map "$tmp/map"
check "locate bad prior" 2 "must look like LAT,LON,RADIUS_M" -- "$cli" locate --map "$tmp/map" --image a.jpg --camera "$tmp/cam.yml" --prior 44,-40
check "locate bad method" 2 "must be auto, points or pair" -- "$cli" locate --map "$tmp/map" --image a.jpg --camera "$tmp/cam.yml" --method guess
check "locate missing map" 2 "no map catalog" -- "$cli" locate --map "$tmp/map" --image "$tmp/cam.yml" --camera "$tmp/cam.yml"
check "locate missing image" 2 "cannot read or decode image" -- "$cli" locate --map "$tmp/map" --image "$tmp/none.jpg" --camera "$tmp/cam.yml"

echo "$passed passed, $failed failed"
[ "$failed" -eq 0 ]

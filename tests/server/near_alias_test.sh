#!/usr/bin/env bash
# A near alias, end to end: the service tests' survey (every other frame, to keep the test
# short) indexed twice, once where it was driven and once as if driven 15 m north (the same images, every latitude shifted): each place has a
# twin nearer than distinct_place_m (30 m), as a terrace of one design has its houses. Every
# check before the nearby one sees one place (the twin's references lie within 30 m, so they
# are no rival), and a fix at either copy carries the small levels of a good one. The nearby
# check must find the other copy and flag the fix: no usable fix more than 3 m from the truth,
# and most would-be usable fixes flagged place_ambiguity. Guards the nearby check
# (server/engine/place_ambiguity.cc SelectNearby, PoseElsewhere, NearbyAliasReason;
# tests/mutants/mutants.tsv: nearby_check_skipped).
# Usage: near_alias_test.sh BUILD_DIR SERVICE_DATA_DIR
set -u
build="$1" data="$2"
idx="$build/indexer/sightfix-indexer"
cli="$build/client/sightfix"
town="$data/town"
source "$(dirname "$0")/../lib/checks.sh"

# 15 m north: 15 / 111 132 m per degree of latitude near 44 N (WGS84 meridian arc, common
# practice); nearer than distinct_place_m, farther than any usable fix's error.
twin="$tmp/twin"
mkdir -p "$twin/images"
cp "$town/survey/camera.yml" "$twin/"
for f in "$town"/survey/images/*.jpg; do
  ln -s "$f" "$twin/images/$(basename "$f")"
  # One byte after the JPEG's end marker: decoders ignore it, the indexer's duplicate check
  # (a file hash) does not.
  { cat "$f"; printf '\n'; } >"$twin/images/north_$(basename "$f")"
done
"$py" - "$town/survey/drive.csv" "$twin/drive.csv" <<'PY'
import csv, datetime, sys
rows = list(csv.reader(open(sys.argv[1])))
t = rows[0].index("timestamp")
lat = rows[0].index("lat")
def later(stamp):  # an hour after: the second drive of the same street, in time order
    d = datetime.datetime.strptime(stamp, "%Y-%m-%dT%H:%M:%S.%fZ") + datetime.timedelta(hours=1)
    return d.strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z"
kept = rows[1::2]
with open(sys.argv[2], "w", newline="") as out:
    w = csv.writer(out, lineterminator="\n")
    w.writerow(rows[0])
    for r in kept:
        w.writerow(r)
    for r in kept:
        s = list(r)
        s[0] = s[0].replace("images/", "images/north_")
        s[lat] = "%.9f" % (float(r[lat]) + 15 / 111132.0)
        s[t] = later(r[t])
        w.writerow(s)
PY
"$idx" build --drive "$twin" --map "$tmp/map" --zoom 18 --quiet >"$tmp/build.txt" 2>&1 \
  && ok "map with every place twice, 15 m apart, built" || { cat "$tmp/build.txt"; bad "build"; }

# usable fixes, of them more than 3 m off, and place_ambiguity fixes, from fixes.csv.
tally() {
  "$py" - "$1/fixes.csv" <<'PY'
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1])))
usable = [r for r in rows if r["integrity"] == "usable"]
far = [r for r in usable if float(r["error_m"]) > 3]
print(len(rows), len(usable), len(far), sum(r["integrity"] == "place_ambiguity" for r in rows))
PY
}
"$cli" replay --map "$tmp/map" --drive "$town/query-day" --out "$tmp/none" --prior none \
  >"$tmp/none.txt" 2>&1 || { tail -3 "$tmp/none.txt"; bad "replay without a prior"; }
read -r n usable far flagged < <(tally "$tmp/none")
echo "no prior: $n queries, $usable usable ($far more than 3 m off), $flagged place_ambiguity"
[ "$far" = 0 ] && ok "no usable fix at the twin place" || bad "$far usable fixes more than 3 m off"
[ "$flagged" -ge $((n / 3)) ] && ok "the twin 15 m away flags the fixes" \
  || bad "only $flagged of $n fixes flagged place_ambiguity"
finish

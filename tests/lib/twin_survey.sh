# Sourced by the place tests (after checks.sh, which sets $py and $tmp).
# twin_survey SURVEY OUT NORTH_M STEP writes OUT, a drive holding every STEP-th frame of SURVEY
# twice: once where it was driven and once as if driven NORTH_M metres north, an hour later (the
# second drive of the same street, in time order), the same images under north_ names. Degrees
# of latitude from metres: 111 132 m per degree near 44 N (WGS84 meridian arc, common practice).
# twin_map IDX SURVEY NORTH_M STEP MAP indexes such a drive (in $tmp/twin) into MAP at zoom 18,
# its log in $tmp/build.txt; its exit status is the indexer's.
twin_survey() {
  local survey="$1" out="$2" north_m="$3" step="$4" f
  mkdir -p "$out/images"
  cp "$survey/camera.yml" "$out/"
  for f in "$survey"/images/*.jpg; do
    ln -s "$f" "$out/images/$(basename "$f")"
    # One byte after the JPEG's end marker: decoders ignore it, the indexer's duplicate check
    # (a file hash) does not.
    { cat "$f"; printf '\n'; } >"$out/images/north_$(basename "$f")"
  done
  "$py" - "$survey/drive.csv" "$out/drive.csv" "$north_m" "$step" <<'PY'
import csv, datetime, sys
rows = list(csv.reader(open(sys.argv[1])))
north_m, step = float(sys.argv[3]), int(sys.argv[4])
t, lat = rows[0].index("timestamp"), rows[0].index("lat")
def later(stamp):
    d = datetime.datetime.strptime(stamp, "%Y-%m-%dT%H:%M:%S.%fZ") + datetime.timedelta(hours=1)
    return d.strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z"
kept = rows[1::step]
with open(sys.argv[2], "w", newline="") as out:
    w = csv.writer(out, lineterminator="\n")
    w.writerow(rows[0])
    for r in kept:
        w.writerow(r)
    for r in kept:
        s = list(r)
        s[0] = s[0].replace("images/", "images/north_")
        s[lat] = "%.9f" % (float(r[lat]) + north_m / 111132.0)
        s[t] = later(r[t])
        w.writerow(s)
PY
}

twin_map() {
  local idx="$1" survey="$2" north_m="$3" step="$4" map="$5"
  twin_survey "$survey" "$tmp/twin" "$north_m" "$step"
  "$idx" build --drive "$tmp/twin" --map "$map" --zoom 18 --quiet >"$tmp/build.txt" 2>&1
}

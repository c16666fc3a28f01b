#!/usr/bin/env bash
# The installed package, used as a vehicle stack would: `cmake --install` into a temporary
# prefix, then a ten-line consumer outside the tree (tests/package/consumer/) is configured with
# find_package(sightfix COMPONENTS client), built, and asks a running sightfix-server for a fix.
# Checks: the package's files are where the README says; the consumer's real link line has no
# FAISS, Ceres, OpenCV features2d/calib3d, SQLite or engine library; every installed public
# header compiles alone; the fix it prints lies near the query's truth.
# Usage: package_test.sh SOURCE_DIR BUILD_DIR SERVICE_DATA_DIR
set -u
src="$1" build="$2" data="$3"
server_pid=""
cleanup_extra() { [ -n "$server_pid" ] && kill "$server_pid" 2>/dev/null; }
source "$src/tests/lib/checks.sh"
source "$src/tests/lib/server_port.sh"
prefix="$tmp/prefix"

cmake --install "$build" --prefix "$prefix" >"$tmp/install.log" 2>&1 && ok "cmake --install" \
  || bad "cmake --install: $(tail -5 "$tmp/install.log")"
for f in bin/sightfix bin/sightfix-server bin/sightfix-indexer lib/libsightfix_client.a \
  include/sightfix/client/api/client.h include/sightfix/proto/sightfix.pb.h \
  include/sightfix/proto/sightfix.proto lib/cmake/sightfix/sightfixConfig.cmake \
  lib/cmake/sightfix/sightfixConfigVersion.cmake; do
  [ -e "$prefix/$f" ] && ok "installed $f" || bad "missing $f"
done
[ ! -e "$prefix/include/sightfix/indexer/builder" ] && ok "the builder's headers stay internal" \
  || bad "builder headers installed"

# Every installed public header compiles alone (with the package's include folders).
hdr_fail=0 hdr_n=0
incs=(-I"$prefix/include/sightfix" -I"$prefix/include/sightfix/proto" -I/usr/include/opencv4)
while IFS= read -r h; do
  hdr_n=$((hdr_n + 1))
  if ! echo "#include \"${h#"$prefix/include/sightfix/"}\"" | g++ -std=c++17 -fsyntax-only \
      "${incs[@]}" -x c++ - 2>"$tmp/hdr.err"; then
    hdr_fail=$((hdr_fail + 1)); echo "  does not compile alone: $h"; head -3 "$tmp/hdr.err"
  fi
done < <(find "$prefix/include/sightfix" -name '*.h' ! -name '*.pb.h' | sort)
[ "$hdr_n" -gt 20 ] && [ "$hdr_fail" -eq 0 ] && ok "$hdr_n public headers compile alone" \
  || bad "public headers: $hdr_fail of $hdr_n do not compile alone"

cmake -S "$src/tests/package/consumer" -B "$tmp/consumer" -DCMAKE_PREFIX_PATH="$prefix" \
  >"$tmp/consumer.log" 2>&1 && ok "consumer configures with find_package(sightfix COMPONENTS client)" \
  || bad "consumer configure: $(tail -8 "$tmp/consumer.log")"
cmake --build "$tmp/consumer" >>"$tmp/consumer.log" 2>&1 && ok "consumer builds" \
  || bad "consumer build: $(tail -8 "$tmp/consumer.log")"
link="$(cat "$tmp/consumer/CMakeFiles/where_am_i.dir/link.txt" 2>/dev/null)"
echo "  consumer link line: $link"
[ -n "$link" ] && ok "consumer link line read" || bad "no link line"
for lib in faiss ceres opencv_features2d opencv_calib3d sqlite3 exiv2 libproj sightfix_engine \
  sightfix_map sightfix_vision; do
  case "$link" in *"$lib"*) bad "consumer links $lib" ;; *) ok "consumer does not link $lib" ;; esac
done
case "$link" in *libsightfix_client.a*) ok "consumer links the thin client" ;; *) bad "no client lib" ;; esac

# Ask a running server for a fix.
"$build/server/sightfix-server" --map "$data/map" --listen 127.0.0.1:0 --http "" --workers 1 \
  2>"$tmp/server.log" &
server_pid=$!
port="$(serving_port "$tmp/server.log" "$server_pid")"
tile="$("$py" -c 'import sqlite3,sys; print(sqlite3.connect(sys.argv[1]).execute("select tile from tiles order by ordinal limit 1").fetchone()[0])' "$data/map/catalog.sqlite")"
drive="$data/town/query-day"
row="$(sed -n 6p "$drive/drive.csv")"
image="$drive/$(echo "$row" | cut -d, -f1)"
"$tmp/consumer/where_am_i" "127.0.0.1:$port" "$image" "$tile#0" >"$tmp/fix.txt" 2>"$tmp/fix.err" \
  && ok "consumer got an answer: $(cat "$tmp/fix.txt")" || bad "consumer: $(cat "$tmp/fix.err")"
"$py" - "$tmp/fix.txt" "$row" "$drive/drive.csv" <<'PY' && ok "the consumer's fix lies within 5 m of the truth" || bad "consumer fix far from truth"
import math, sys
q, lat, lon, r = open(sys.argv[1]).read().split()
header = open(sys.argv[3]).readline().strip().split(",")
row = dict(zip(header, sys.argv[2].split(",")))
dn = (float(lat) - float(row["lat"])) * 111320
de = (float(lon) - float(row["lon"])) * 111320 * math.cos(math.radians(float(row["lat"])))
print(f"  quality {q}, error {math.hypot(de, dn):.3f} m, radius95 {float(r):.3f} m")
assert q == "REFINED" and math.hypot(de, dn) < 5
PY
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""
finish

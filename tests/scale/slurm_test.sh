#!/usr/bin/env bash
# The map build on a batch scheduler, for real: a single-node Slurm cluster (slurm_cluster.sh)
# runs scripts/slurm/submit.sh (train and plan jobs, a job array of 3 tile shards, publish) on
# the service tests' 150 m town, and the map it publishes is byte-identical (catalog and every
# tile file) to a one-machine `sightfix-indexer build` of the same survey. Then, by hand, the
# faults a scheduler sees: a shard killed after writing a tile (no manifest) and a shard never
# run make publish refuse and name them, the map unchanged; a shard run twice is harmless; the
# result is again byte-identical; a second publish changes nothing.
# Usage: slurm_test.sh BUILD_DIR SERVICE_DATA_DIR   (root; slurm-wlm and munge installed)
set -u
build="$1" data="$2"
root="$(cd "$(dirname "$0")/../.." && pwd)"
idx="$build/indexer/sightfix-indexer"
source "$(dirname "$0")/../lib/checks.sh"
cluster="$tmp/cluster"
cleanup_extra() { bash "$root/tests/scale/slurm_cluster.sh" stop "$cluster" >/dev/null 2>&1 || true; }
# A fixed clock for the catalog (reproducible-builds.org SOURCE_DATE_EPOCH).
export SOURCE_DATE_EPOCH=1790000000
drive="$data/town/survey"

# The tree of a map as "sha256  path" lines, without the writer's lock file and staging.
tree() { (cd "$1" && find . -type f ! -name .writer.lock ! -path './staging/*' | sort | xargs sha256sum); }

eval "$(bash "$root/tests/scale/slurm_cluster.sh" start "$cluster")" &&
  [ -n "${SLURM_CONF:-}" ] && ok "single-node Slurm cluster up ($(sinfo -h -o '%D node, %c CPUs'))" ||
  { bad "Slurm cluster did not start"; finish; exit 1; }

t0=$(date +%s)
bash "$root/scripts/slurm/submit.sh" --drive "$drive" --map "$tmp/slurm_map" --shards 3 --cpus 1 \
  --mem 3000 --train-mem 4000 --indexer "$idx" --wait -- --zoom 18 >"$tmp/submit.out" 2>&1
rc=$?
t1=$(date +%s)
cat "$tmp/submit.out"
[ "$rc" = 0 ] && ok "Slurm workflow: train + plan -> 3 shards -> publish, exit 0 in $((t1 - t0)) s" ||
  { bad "Slurm workflow exit $rc"; tail -n 30 "$tmp/slurm_map/staging/logs/"*.log; }
n_logs=$(ls "$tmp/slurm_map/staging/logs/" | grep -c '^tiles-' || true)
[ "$n_logs" = 3 ] && ok "the shard job array ran 3 tasks (one log each)" || bad "shard logs: $n_logs"
grep -h "published map version 1" "$tmp/slurm_map/staging/logs/"publish-*.log >/dev/null &&
  ok "publish job: $(grep -h 'published map' "$tmp/slurm_map/staging/logs/"publish-*.log)" || bad "publish log"
"$idx" verify --map "$tmp/slurm_map" >/dev/null && ok "Slurm-built map verifies" || bad "Slurm-built map verify"

"$idx" build --drive "$drive" --map "$tmp/one_map" --zoom 18 --quiet >/dev/null 2>&1 &&
  ok "one-machine build" || bad "one-machine build"
tree "$tmp/slurm_map" >"$tmp/slurm.tree"
tree "$tmp/one_map" >"$tmp/one.tree"
n_files=$(wc -l <"$tmp/one.tree")
if cmp -s "$tmp/slurm.tree" "$tmp/one.tree" && [ "$n_files" -ge 3 ]; then
  ok "Slurm map byte-identical to the one-machine build ($n_files files: catalog + $((n_files - 1)) tiles)"
else
  bad "Slurm map differs from the one-machine build"; diff "$tmp/slurm.tree" "$tmp/one.tree"
fi
bash "$root/tests/scale/slurm_cluster.sh" stop "$cluster" && ok "cluster stopped" || bad "cluster stop"

# Faults, by hand (no scheduler needed): a third map, 2 shards.
m="$tmp/fault_map"
plan="$m/staging/plan.json"
"$idx" plan --drive "$drive" --map "$m" --zoom 18 --shards 2 --quiet >/dev/null &&
  "$idx" train --drive "$drive" --map "$m" --quiet >/dev/null && ok "plan (2 shards) and train" ||
  bad "plan and train"
# Shard 1/2 killed from outside (SIGKILL) as soon as its first tile file is in place (renamed:
# a *.sqlite, not a *.sqlite.tmp), before its manifest. A tight builtin glob loop: the shard still
# has the tile's SHA-256 and the manifest to write, tens of milliseconds at least.
"$idx" build-tiles --plan "$plan" --shard 1/2 --quiet >/dev/null 2>&1 &
pid=$!
tiles_glob="$m/staging/*/tiles/*/*/*-v*.sqlite"
while kill -0 "$pid" 2>/dev/null && ! compgen -G "$tiles_glob" >/dev/null; do :; done
kill -KILL "$pid" 2>/dev/null
wait "$pid" 2>/dev/null
rc=$?
manifests=$(compgen -G "$m/staging/*/shard-1-of-2.json" | wc -l)
[ "$rc" = 137 ] && compgen -G "$tiles_glob" >/dev/null && [ "$manifests" = 0 ] &&
  ok "shard 1/2 killed (SIGKILL) after writing its first tile, before its manifest" ||
  bad "kill: exit $rc, manifests $manifests"
out=$("$idx" publish --plan "$plan" 2>&1)
rc=$?
if [ "$rc" = 2 ] && echo "$out" | grep -q "shard 1/2 (no " && echo "$out" | grep -q "shard 2/2 (no "; then
  ok "publish refuses, naming shards 1/2 and 2/2; exit 2"
else
  bad "publish with missing shards: exit $rc: $out"
fi
[ ! -e "$m/catalog.sqlite" ] && ok "no catalog written" || bad "a catalog appeared"
"$idx" build-tiles --plan "$plan" --shard 2/2 --quiet >/dev/null && ok "shard 2/2" || bad "shard 2/2"
out=$("$idx" publish --plan "$plan" 2>&1)
rc=$?
echo "$out" | grep -q "shard 1/2 (no " && ! echo "$out" | grep -q "shard 2/2" && [ "$rc" = 2 ] &&
  ok "publish names only shard 1/2 now" || bad "publish, one missing: exit $rc: $out"
"$idx" build-tiles --plan "$plan" --shard 1/2 --quiet >/dev/null && ok "shard 1/2 run again" || bad "shard 1/2 rerun"
staged() { (cd "$m/staging" && find . -type f -path './*/*' | sort | xargs sha256sum); }
staged >"$tmp/staged.before"
"$idx" build-tiles --plan "$plan" --shard 2/2 --quiet >/dev/null
staged >"$tmp/staged.after"
cmp -s "$tmp/staged.before" "$tmp/staged.after" &&
  ok "shard 2/2 run twice: every staged file (tiles, manifests) the same bytes" ||
  { bad "repeated shard differs"; diff "$tmp/staged.before" "$tmp/staged.after"; }
"$idx" publish --plan "$plan" --quiet >"$tmp/publish.out" 2>&1 && ok "publish" ||
  { bad "publish"; cat "$tmp/publish.out"; }
tree "$m" >"$tmp/fault.tree"
cmp -s "$tmp/fault.tree" "$tmp/one.tree" && ok "after kill, rerun and repeat: byte-identical again" ||
  { bad "fault map differs"; diff "$tmp/fault.tree" "$tmp/one.tree"; }
out=$("$idx" publish --plan "$plan" 2>&1) && echo "$out" | grep -q "already published" &&
  ok "publish again: already published, nothing changed" || bad "publish again: $out"
tree "$m" | cmp -s - "$tmp/one.tree" && ok "map unchanged by the second publish" || bad "second publish changed the map"
finish

#!/usr/bin/env bash
# Builds a sightfix map on a Slurm cluster: train and plan (two jobs, run side by side), then
# the tile shards (one job array, each task one shard), then publish, chained with
# --dependency=afterok so a step starts only when the ones it needs have succeeded.
#
#   scripts/slurm/submit.sh --drive DIR --map MAPDIR --shards N [options] [-- INDEXER OPTIONS]
#
# Options:
#   --cpus C          CPUs per shard task (default 2); each task runs --jobs C threads
#   --mem MB          memory per shard task (default 4000)
#   --train-mem MB    memory of the train job (default 8000; about 1 MB per training image)
#   --partition P     Slurm partition (default: the cluster's default)
#   --indexer PATH    sightfix-indexer to run (default: the one built next to this script)
#   --logs DIR        job logs (default MAPDIR/staging/logs)
#   --wait            wait for publish and exit with its status
# Anything after "--" goes to train and plan (e.g. --zoom 18 --overwrite --skip-bad).
#
# DIR, MAPDIR and the indexer must be on storage every node sees at the same path (README,
# "Scaling out"). Not a certified navigation source: see README, "Safety".
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
drive= map= shards= cpus=2 mem=4000 train_mem=8000 partition= wait=0 logs=
indexer="$here/../../build/indexer/sightfix-indexer"
extra=()
while [ $# -gt 0 ]; do
  case "$1" in
    --drive) drive="$2"; shift 2 ;;
    --map) map="$2"; shift 2 ;;
    --shards) shards="$2"; shift 2 ;;
    --cpus) cpus="$2"; shift 2 ;;
    --mem) mem="$2"; shift 2 ;;
    --train-mem) train_mem="$2"; shift 2 ;;
    --partition) partition="$2"; shift 2 ;;
    --indexer) indexer="$2"; shift 2 ;;
    --logs) logs="$2"; shift 2 ;;
    --wait) wait=1; shift ;;
    --) shift; extra=("$@"); break ;;
    -h|--help) sed -n '2,22p' "$0" | sed 's/^# \{0,1\}//'; exit 0 ;;
    *) echo "submit.sh: unknown option $1 (see --help)" >&2; exit 2 ;;
  esac
done
[ -n "$drive" ] && [ -n "$map" ] && [ -n "$shards" ] ||
  { echo "submit.sh: needs --drive DIR --map MAPDIR --shards N (see --help)" >&2; exit 2; }
[[ "$shards" =~ ^[1-9][0-9]*$ ]] || { echo "submit.sh: --shards must be a positive integer" >&2; exit 2; }
[ -x "$indexer" ] || { echo "submit.sh: no sightfix-indexer at $indexer (use --indexer)" >&2; exit 2; }
command -v sbatch >/dev/null || { echo "submit.sh: sbatch not found: is this a Slurm login node?" >&2; exit 2; }
drive="$(cd "$drive" && pwd)"
mkdir -p "$map"
map="$(cd "$map" && pwd)"
indexer="$(cd "$(dirname "$indexer")" && pwd)/$(basename "$indexer")"
logs="${logs:-$map/staging/logs}"
mkdir -p "$logs"
plan="$map/staging/plan.json"
common=(--parsable --export=ALL,SIGHTFIX_INDEXER="$indexer")
[ -n "$partition" ] && common+=(--partition="$partition")

train=$(sbatch "${common[@]}" --job-name=sightfix-train --cpus-per-task="$cpus" --mem="$train_mem" \
  --output="$logs/train-%j.log" "$here/train.sbatch" --drive "$drive" --map "$map" "${extra[@]}")
planned=$(sbatch "${common[@]}" --job-name=sightfix-plan --cpus-per-task="$cpus" --mem=2000 \
  --output="$logs/plan-%j.log" "$here/plan.sbatch" --drive "$drive" --map "$map" \
  --shards "$shards" --plan "$plan" "${extra[@]}")
tiles=$(sbatch "${common[@]}" --job-name=sightfix-tiles --array="1-$shards" \
  --cpus-per-task="$cpus" --mem="$mem" --dependency="afterok:$train:$planned" \
  --kill-on-invalid-dep=yes \
  --output="$logs/tiles-%A-%a.log" "$here/tiles.sbatch" "$plan" "$shards")
publish_args=("${common[@]}" --job-name=sightfix-publish --cpus-per-task=1 --mem=2000
  --dependency="afterok:$tiles" --kill-on-invalid-dep=yes --output="$logs/publish-%j.log")
echo "train job $train, plan job $planned, tile shards job array $tiles (1-$shards), logs in $logs"
if [ "$wait" = 1 ]; then
  echo "waiting for publish..."
  set +e
  publish=$(sbatch "${publish_args[@]}" --wait "$here/publish.sbatch" "$plan")
  rc=$?
  set -e
  echo "publish job ${publish%%;*} ended with exit code $rc; its log: $logs/publish-${publish%%;*}.log"
  exit "$rc"
fi
publish=$(sbatch "${publish_args[@]}" "$here/publish.sbatch" "$plan")
echo "publish job $publish; follow with: squeue -j $train,$planned,$tiles,$publish"

#!/usr/bin/env bash
# The scale-out tests (scripts/test.sh runs only the balancer one): the map build on a single-node
# Slurm cluster the test starts and stops on the host that runs it (tests/scale/slurm_test.sh),
# two server replicas behind HAProxy with one killed and restarted under load, and the client
# failing over between endpoints (tests/scale/balancer_test.cc). Installs what is missing
# (slurm-wlm, munge, haproxy); needs root for the Slurm daemons.
# Usage: scripts/test-scale.sh   (BUILD_DIR overrides ./build)
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
bash "$root/scripts/deps.sh"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo >/dev/null
cmake --build "$build" -j "$(env -u OMP_NUM_THREADS -u OMP_THREAD_LIMIT nproc)"
cd "$build"
ctest --output-on-failure -L scale

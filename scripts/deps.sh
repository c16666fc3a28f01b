#!/usr/bin/env bash
# Installs the Debian packages sightfix builds, tests and runs with. Idempotent: packages
# already present are skipped, and apt-get runs only when something is missing.
set -euo pipefail

packages=(
  build-essential cmake pkg-config git
  libopencv-dev libfaiss-dev libopenblas-dev
  libboost-all-dev libprotobuf-dev protobuf-compiler libssl-dev openssl
  libsqlite3-dev libgtest-dev libgmock-dev libgeographiclib-dev libexiv2-dev
  libceres-dev libproj-dev proj-data libbenchmark-dev libyaml-cpp-dev
  nlohmann-json3-dev opencv-doc python3 python3-protobuf chromium exiv2
  clang-14 libclang-rt-14-dev
  haproxy slurm-wlm munge curl
)

missing=()
for p in "${packages[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q 'install ok installed'; then
    missing+=("$p")
  fi
done

if [ ${#missing[@]} -eq 0 ]; then
  echo "deps: all ${#packages[@]} packages present"
  exit 0
fi

echo "deps: installing ${#missing[@]} packages: ${missing[*]}"
sudo_cmd=()
if [ "$(id -u)" -ne 0 ]; then sudo_cmd=(sudo); fi
export DEBIAN_FRONTEND=noninteractive
"${sudo_cmd[@]}" apt-get update -q
"${sudo_cmd[@]}" apt-get install -y -q --no-install-recommends "${missing[@]}"

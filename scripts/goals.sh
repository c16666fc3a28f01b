#!/usr/bin/env bash
# Runs the goal checks: tests whose thresholds an issue sets but which are not met yet. They
# print the measured figures; a failure here is a known, reported gap, not a broken build.
set -euo pipefail
SIGHTFIX_ONLY_GOALS=1 exec bash "$(dirname "$0")/test.sh" -V "$@"

# Shared by the shell tests: a temporary folder removed on exit, `ok NAME` and `bad NAME` that
# count and print, `expect` that checks a command's exit code and output, `finish` that prints
# the tally and fails when anything failed.
# Source it after `set -u`; `cleanup_extra` (if a test defines it) runs before the folder goes.
tmp="$(mktemp -d)"
passed=0 failed=0
trap 'declare -F cleanup_extra >/dev/null && cleanup_extra; rm -rf "$tmp"' EXIT
py=/usr/bin/python3
ok() { passed=$((passed + 1)); echo "ok   $1"; }
bad() { failed=$((failed + 1)); echo "FAIL $1"; }
# expect NAME EXIT PATTERN -- COMMAND...: the exit code and a line of stdout+stderr matching.
expect() {
  local name="$1" want="$2" pattern="$3" out rc
  shift 4
  out="$("$@" 2>&1)"
  rc=$?
  if [ "$rc" -eq "$want" ] && printf '%s' "$out" | grep -q -- "$pattern"; then
    ok "$name"
  else
    bad "$name (exit $rc, want $want; output: $(printf '%s' "$out" | head -3))"
  fi
}
finish() {
  echo "$passed passed, $failed failed"
  [ "$failed" -eq 0 ]
}
# exact_camera SRC DST: the clean demo world's camera.yml SRC, which is exact, written to DST
# saying so (stated sigmas far below the default 1 % of the focal length), so that a test which
# compares maps is not moved by the engine's per-image estimate of the query's focal length
# (README, "Self-calibration").
exact_camera() {
  { cat "$1"; printf 'focal_length_sigma_px: 0.05\nk1_sigma: 0.0005\n'; } >"$2"
}

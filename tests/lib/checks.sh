# Shared by the shell tests: a temporary folder removed on exit, `ok NAME` and `bad NAME` that
# count and print, `finish` that prints the tally and fails when anything failed.
# Source it after `set -u`; `cleanup_extra` (if a test defines it) runs before the folder goes.
tmp="$(mktemp -d)"
passed=0 failed=0
trap 'declare -F cleanup_extra >/dev/null && cleanup_extra; rm -rf "$tmp"' EXIT
py=/usr/bin/python3
ok() { passed=$((passed + 1)); echo "ok   $1"; }
bad() { failed=$((failed + 1)); echo "FAIL $1"; }
finish() {
  echo "$passed passed, $failed failed"
  [ "$failed" -eq 0 ]
}

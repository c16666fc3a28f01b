#!/usr/bin/env bash
# Security defaults of sightfix-server, as a user meets them: it listens on loopback unless told
# otherwise; off loopback it refuses plaintext (tls_test.sh covers TLS) unless told
# --plaintext-beyond-loopback, and then still asks for a token; with a token every call must
# carry it (calls without it or with a wrong one are refused and served nothing); and neither
# the right token nor a wrong one ever appears in the server's log or the client's output.
# Usage: security_test.sh BUILD_DIR SERVICE_DATA_DIR
set -u
build="$1" data="$2"
cli="$build/client/sightfix"
server_bin="$build/server/sightfix-server"
server_pid=""
cleanup_extra() { [ -n "$server_pid" ] && kill "$server_pid" 2>/dev/null; wait 2>/dev/null; }
source "$(dirname "$0")/../lib/checks.sh"
source "$(dirname "$0")/../lib/server_port.sh"
q="$data/town/query-day"

"$server_bin" --help >"$tmp/help.txt"
grep -q -- "--listen arg (=127.0.0.1:7411)" "$tmp/help.txt" && grep -q -- "--http arg (=127.0.0.1:7412)" "$tmp/help.txt" &&
  ok "defaults listen on loopback (127.0.0.1:7411, HTTP 127.0.0.1:7412)" || bad "defaults: $(grep -- --listen "$tmp/help.txt")"

"$server_bin" --map "$data/map" --listen 0.0.0.0:0 --http "" >"$tmp/open.txt" 2>&1; rc=$?
[ $rc -eq 2 ] && grep -q "refusing to serve beyond loopback in plaintext" "$tmp/open.txt" &&
  ok "0.0.0.0 without TLS: refused (exit 2)" || bad "open listen (exit $rc): $(cat "$tmp/open.txt")"
"$server_bin" --map "$data/map" --listen 0.0.0.0:0 --http "" --plaintext-beyond-loopback >"$tmp/open.txt" 2>&1; rc=$?
[ $rc -eq 2 ] && grep -q "refusing to listen beyond loopback in plaintext without --token-file" "$tmp/open.txt" &&
  ok "0.0.0.0 in plaintext without a token: refused (exit 2)" || bad "open listen (exit $rc): $(cat "$tmp/open.txt")"
"$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http 0.0.0.0:0 >"$tmp/open2.txt" 2>&1; rc=$?
[ $rc -eq 2 ] && ok "an HTTP port off loopback: refused (exit 2)" || bad "open http (exit $rc)"

"$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --flood-block-s -1 >"$tmp/flood.txt" 2>&1; rc=$?
[ $rc -eq 2 ] && grep -q "flood_block_s must be >= 0" "$tmp/flood.txt" &&
  ok "a negative --flood-block-s is refused" || bad "flood block (exit $rc): $(cat "$tmp/flood.txt")"

echo "short" >"$tmp/short.token"
"$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --token-file "$tmp/short.token" >"$tmp/short.txt" 2>&1; rc=$?
[ $rc -eq 2 ] && grep -q "shorter than 16" "$tmp/short.txt" &&
  ok "a guessable token is refused" || bad "short token (exit $rc): $(cat "$tmp/short.txt")"

token="$(head -c 24 /dev/urandom | od -An -tx1 | tr -d ' \n')"
wrong="$(head -c 24 /dev/urandom | od -An -tx1 | tr -d ' \n')"
printf '%s\n' "$token" >"$tmp/server.token"
printf '%s\n' "$wrong" >"$tmp/wrong.token"
"$server_bin" --map "$data/map" --listen 0.0.0.0:0 --http "" --token-file "$tmp/server.token" \
  --plaintext-beyond-loopback 2>"$tmp/server.log" &
server_pid=$!
port="$(serving_port "$tmp/server.log" "$server_pid")"
[ -n "$port" ] && ok "0.0.0.0 in plaintext, told so, with a token file: serving" ||
  bad "server with token did not start: $(cat "$tmp/server.log")"

"$cli" describe --server "127.0.0.1:$port" --token-file "$tmp/server.token" >"$tmp/out.txt" 2>&1 &&
  ok "describe with the token" || bad "describe with token: $(cat "$tmp/out.txt")"
"$cli" describe --server "127.0.0.1:$port" >>"$tmp/out.txt" 2>&1; rc=$?
[ $rc -ne 0 ] && grep -q UNAUTHENTICATED "$tmp/out.txt" && ok "describe without a token: UNAUTHENTICATED" || bad "no token (exit $rc)"
"$cli" describe --server "127.0.0.1:$port" --token-file "$tmp/wrong.token" >>"$tmp/out.txt" 2>&1; rc=$?
[ $rc -ne 0 ] && ok "describe with a wrong token: refused" || bad "wrong token (exit $rc)"
"$cli" locate --server "127.0.0.1:$port" --token-file "$tmp/wrong.token" --image "$q/images/000003.jpg" \
  --camera "$q/camera.yml" --json >>"$tmp/out.txt" 2>&1; rc=$?
[ $rc -ne 0 ] && ok "locate with a wrong token: refused" || bad "locate wrong token (exit $rc)"
"$cli" locate --server "127.0.0.1:$port" --token-file "$tmp/server.token" --image "$q/images/000003.jpg" \
  --camera "$q/camera.yml" --json >>"$tmp/out.txt" 2>&1 && ok "locate with the token" || bad "locate with token"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""

calls=$(grep -c '"method"' "$tmp/server.log")
[ "$calls" -ge 5 ] && ok "the server logged $calls calls" || bad "calls logged: $calls"
grep -q UNAUTHENTICATED "$tmp/server.log" && ok "refusals are logged (as UNAUTHENTICATED)" || bad "refusals not logged"
! grep -qF "$token" "$tmp/server.log" "$tmp/out.txt" && ok "the token never appears in the server log or client output" ||
  bad "the token leaked: $(grep -lF "$token" "$tmp/server.log" "$tmp/out.txt")"
! grep -qF "$wrong" "$tmp/server.log" "$tmp/out.txt" && ok "a wrong token never appears either" || bad "the wrong token leaked"
finish

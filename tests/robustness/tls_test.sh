#!/usr/bin/env bash
# TLS on the query port (proto/tls_profile.h, server/service/service.h), as a user meets it:
# certificates made at test time with scripts/make-certs.sh (`openssl ca`); a call with a good
# vehicle certificate succeeds and names the vehicle in the server's log; every other peer is
# refused with a clear error on both sides and served nothing: no certificate, one from another
# CA, an expired one, a wrong server name, plaintext sent to the TLS port, TLS 1.2 (a
# protocol_version alert, number 70: RFC 8446 6.2), no or a foreign ALPN, garbage in place of a
# handshake, a stalled handshake (cut off at the read timeout). Independent peers: `openssl
# s_client` against the server (protocol, cipher, ALPN and verification printed) and the client
# library against `openssl s_server`. Beyond loopback the server refuses plaintext unless told
# --plaintext-beyond-loopback. The token stays a second factor under TLS. Revocation: a revoked
# vehicle is refused; a CRL past its nextUpdate is enforced for the grace and then refuses all;
# a CA without a CRL or an unreadable one stops the server at start; SIGHUP rereads the CRL,
# closes the live connection of a newly revoked vehicle and keeps the last good CRL when the
# new one is bad; /metrics exposes the CRL's nextUpdate. Fair shares: a handshake beyond the
# per-address limit is closed at once, and the client library retries until served. The HTTP
# port: plaintext on loopback; beyond loopback under TLS, curl with a client certificate gets
# /healthz and /metrics, and no certificate, another CA's, a revoked one, TLS 1.2, plaintext and
# a stalled handshake are refused, logged and counted; SIGHUP rereads its CRL; a monitoring CA
# of its own (--http-client-ca) keeps vehicles off it and monitors off the query port. A fleet's
# life: a certificate signed from a request made on the vehicle, a CA rollover (two CAs, two
# CRLs), and a session resumed by openssl s_client.
# Usage: tls_test.sh SOURCE_DIR BUILD_DIR SERVICE_DATA_DIR
set -u
src="$1" build="$2" data="$3"
cli="$build/client/sightfix"
server_bin="$build/server/sightfix-server"
server_pid="" s_server_pid=""
cleanup_extra() {
  for p in $server_pid $s_server_pid; do kill "$p" 2>/dev/null; done
  wait 2>/dev/null
}
source "$(dirname "$0")/../lib/checks.sh"
source "$(dirname "$0")/../lib/server_port.sh"
q="$data/town/query-day"
certs="$src/scripts/make-certs.sh"
pki="$tmp/pki" other="$tmp/other"

bash "$certs" "$pki" ca >/dev/null &&
  bash "$certs" "$pki" server localhost DNS:localhost IP:127.0.0.1 >/dev/null &&
  bash "$certs" "$pki" vehicle vehicle-7 >/dev/null &&
  CA_ARGS="-startdate 20200101000000Z -enddate 20210101000000Z" \
    bash "$certs" "$pki" vehicle vehicle-old >/dev/null &&
  CA_NAME="another CA" bash "$certs" "$other" ca >/dev/null &&
  bash "$certs" "$other" vehicle vehicle-9 >/dev/null &&
  ok "scripts/make-certs.sh made a CA, a server and three vehicle certificates" ||
  { bad "make-certs.sh failed"; finish; exit 1; }
[ "$(stat -c %a "$pki/vehicle-7.key")" = 600 ] && ok "keys are written 0600" || bad "key mode"
bash "$certs" "$pki" vehicle vehicle-8 >/dev/null && bash "$certs" "$pki" revoke vehicle-8 &&
  serial="$(openssl x509 -in "$pki/vehicle-8.crt" -noout -serial | cut -d= -f2)" &&
  openssl crl -in "$pki/crl.pem" -noout -text | grep -q "Serial Number: $serial" &&
  ok "make-certs.sh revoke lists the certificate in crl.pem (the server does not read CRLs yet)" ||
  bad "revoke: no CRL entry"
openssl x509 -in "$pki/vehicle-7.crt" -noout -text | grep -q "id-ecPublicKey" &&
  ok "keys are ECDSA (P-256)" || bad "not an EC key"

# Beyond loopback: plaintext refused unless named; TLS serves without a token.
expect "0.0.0.0 in plaintext: refused" 2 "refusing to serve beyond loopback in plaintext" -- \
  "$server_bin" --map "$data/map" --listen 0.0.0.0:0 --http ""
expect "an HTTP port beyond loopback without TLS: refused" 2 "/metrics beyond loopback in plaintext" -- \
  "$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http 0.0.0.0:0
expect "a monitoring CA needs TLS" 2 "needs TLS" -- \
  "$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --http-client-ca "$pki/ca.crt"
expect "TLS needs all three files" 2 "all three" -- \
  "$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --tls-cert "$pki/localhost.crt"
expect "a key that does not match its certificate: refused" 2 "mismatch" -- \
  "$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --tls-cert "$pki/localhost.crt" \
  --tls-key "$pki/vehicle-7.key" --tls-client-ca "$pki/ca.crt"

"$server_bin" --map "$data/map" --listen 0.0.0.0:0 --http 127.0.0.1:0 --workers 1 \
  --tls-cert "$pki/localhost.crt" --tls-key "$pki/localhost.key" --tls-client-ca "$pki/ca.crt" \
  2>"$tmp/server.log" &
server_pid=$!
read -r port http_port <<<"$(serving_port "$tmp/server.log" "$server_pid")"
[ -n "${port:-}" ] && grep -q '"tls":true,"http_tls":false' "$tmp/server.log" &&
  ok "0.0.0.0 with TLS: serving (the HTTP port on loopback stays plaintext)" ||
  { bad "TLS server did not start: $(cat "$tmp/server.log")"; finish; exit 1; }
good=(--tls-ca "$pki/ca.crt" --tls-cert "$pki/vehicle-7.crt" --tls-key "$pki/vehicle-7.key")

expect "describe with a good certificate" 0 "map version" -- \
  "$cli" describe --server "localhost:$port" "${good[@]}"
expect "locate with a good certificate (by IP: the IP SAN is checked)" 0 '"quality"' -- \
  "$cli" locate --server "127.0.0.1:$port" "${good[@]}" --image "$q/images/000003.jpg" \
  --camera "$q/camera.yml" --json
grep -q '"method":"Locate".*"client":"vehicle-7"' "$tmp/server.log" &&
  ok "the server's log names the vehicle by its certificate" || bad "no client identity in the log"

calls_before=$(grep -c '"method"' "$tmp/server.log")
expect "no client certificate: refused, the client says why" 1 "certificate" -- \
  "$cli" describe --server "localhost:$port" --tls-ca "$pki/ca.crt"
grep -q '"tls_refused":"peer did not return a certificate"' "$tmp/server.log" &&
  ok "... and the server logs it" || bad "no-certificate refusal not logged"
expect "a certificate from another CA: refused" 1 "TLS" -- \
  "$cli" describe --server "localhost:$port" --tls-ca "$pki/ca.crt" --tls-cert "$other/vehicle-9.crt" \
  --tls-key "$other/vehicle-9.key"
grep -q '"tls_refused":"certificate verify failed: unable to get local issuer certificate"' \
  "$tmp/server.log" && ok "... logged as an unknown issuer" || bad "other-CA refusal not logged"
expect "an expired certificate: refused" 1 "TLS" -- \
  "$cli" describe --server "localhost:$port" --tls-ca "$pki/ca.crt" --tls-cert "$pki/vehicle-old.crt" \
  --tls-key "$pki/vehicle-old.key"
grep -q '"tls_refused":"certificate verify failed: certificate has expired"' "$tmp/server.log" &&
  ok "... logged as expired" || bad "expired refusal not logged"
expect "a server whose certificate does not carry the name asked for: refused by the client" 1 \
  "hostname mismatch" -- "$cli" describe --server "localhost:$port" "${good[@]}" \
  --tls-server-name sightfix.invalid
expect "a server signed by a CA the client does not trust: refused by the client" 1 \
  "certificate verify failed" -- "$cli" describe --server "localhost:$port" --tls-ca "$other/ca.crt" \
  --tls-cert "$pki/vehicle-7.crt" --tls-key "$pki/vehicle-7.key"
expect "plaintext sent to the TLS port: a plaintext answer saying so" 1 "speaks TLS 1.3 only" -- \
  "$cli" describe --server "localhost:$port"
grep -q '"tls_refused":"plaintext sent to the TLS port"' "$tmp/server.log" &&
  ok "... and the server logs it" || bad "plaintext refusal not logged"
expect "TLS options without --tls-ca are refused by the CLI" 1 "tls_ca_file" -- \
  "$cli" describe --server "localhost:$port" --tls-cert "$pki/vehicle-7.crt" --tls-key "$pki/vehicle-7.key"
expect "TLS flags with --map are refused (no server to call)" 2 "applies to --server only" -- \
  "$cli" locate --map "$data/map" --tls-ca "$pki/ca.crt" --image "$q/images/000003.jpg" \
  --camera "$q/camera.yml"

# Independent peer: openssl s_client against the server.
s_client() { echo | timeout 10 openssl s_client -connect "127.0.0.1:$port" -CAfile "$pki/ca.crt" "$@" 2>&1; }
out="$(s_client -alpn sightfix/1 -cert "$pki/vehicle-7.crt" -key "$pki/vehicle-7.key" \
  -servername localhost -verify_return_error)"
grep -q "New, TLSv1.3, Cipher is TLS_" <<<"$out" && grep -q "ALPN protocol: sightfix/1" <<<"$out" &&
  grep -q "Verify return code: 0 (ok)" <<<"$out" &&
  ok "openssl s_client: TLS 1.3, ALPN sightfix/1, the server's certificate verified" ||
  bad "s_client: $(grep -E 'Cipher|ALPN|Verify' <<<"$out" | head -3)"
s_client -tls1_2 -cert "$pki/vehicle-7.crt" -key "$pki/vehicle-7.key" | grep -q "alert protocol version.*SSL alert number 70" &&
  ok "TLS 1.2 is refused with a protocol_version alert (70)" || bad "TLS 1.2 not refused with alert 70"
s_client -alpn h2 -cert "$pki/vehicle-7.crt" -key "$pki/vehicle-7.key" | grep -q "alert no application protocol" &&
  ok "a foreign ALPN is refused (no_application_protocol)" || bad "foreign ALPN not refused"
s_client -cert "$pki/vehicle-7.crt" -key "$pki/vehicle-7.key" >/dev/null
grep -q '"tls_refused":"the peer agreed on no application protocol' "$tmp/server.log" &&
  ok "a peer offering no ALPN is refused" || bad "no-ALPN peer not refused"

# Garbage that starts like a handshake record, and a handshake that never comes.
start=$(date +%s)
refusals_before=$(grep -c '"tls_refused"' "$tmp/server.log")
{ printf '\026\003\001\000\005hello'; sleep 2; } | timeout 15 bash -c "cat >/dev/tcp/127.0.0.1/$port" 2>/dev/null
# Polled, not slept: on a loaded machine the server's line may come late.
for _ in $(seq 1 100); do
  [ "$(grep -c '"tls_refused"' "$tmp/server.log")" -gt "$refusals_before" ] && break
  sleep 0.1
done
[ "$(grep -c '"tls_refused"' "$tmp/server.log")" -gt "$refusals_before" ] &&
  ok "garbage in place of a handshake: refused" ||
  bad "garbage not refused: $(tail -2 "$tmp/server.log")"
exec 3<>"/dev/tcp/127.0.0.1/$port"
start=$(date +%s)
timeout 20 cat <&3 >/dev/null
waited=$(($(date +%s) - start))
exec 3<&-
[ "$waited" -ge 8 ] && [ "$waited" -le 20 ] &&
  grep -q '"tls_refused":"handshake not finished within the read timeout"' "$tmp/server.log" &&
  ok "a stalled handshake is cut off at the read timeout (${waited} s)" ||
  bad "stalled handshake: closed after ${waited} s; $(tail -1 "$tmp/server.log")"
calls_after=$(grep -c '"method"' "$tmp/server.log")
[ "$calls_after" -eq "$calls_before" ] && ok "no refused peer was served a call" ||
  bad "refused peers served: $((calls_after - calls_before)) calls"
metrics="$(exec 4<>"/dev/tcp/127.0.0.1/$http_port"; printf 'GET /metrics HTTP/1.0\r\n\r\n' >&4; cat <&4)"
grep -qE "^sightfix_tls_refused_total [1-9]" <<<"$metrics" &&
  ok "/metrics counts the refused handshakes (plaintext HTTP on loopback)" || bad "no tls_refused counter"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""

# The token as a second factor under TLS.
printf '%s\n' "0123456789abcdef0123" >"$tmp/server.token"
"$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --workers 1 --token-file "$tmp/server.token" \
  --tls-cert "$pki/localhost.crt" --tls-key "$pki/localhost.key" --tls-client-ca "$pki/ca.crt" \
  2>"$tmp/server2.log" &
server_pid=$!
port="$(serving_port "$tmp/server2.log" "$server_pid")"
expect "TLS and a token: a call without the token is refused" 1 "UNAUTHENTICATED" -- \
  "$cli" describe --server "localhost:$port" "${good[@]}"
expect "TLS and a token: with both, served" 0 "map version" -- \
  "$cli" describe --server "localhost:$port" "${good[@]}" --token-file "$tmp/server.token"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""

# Revocation: a CRL listing vehicle-8 (made above). Policy checks first.
expect "a CRL needs TLS" 2 "needs TLS" -- \
  "$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --tls-crl "$pki/crl.pem"
cat "$pki/ca.crt" "$other/ca.crt" >"$tmp/both-cas.crt"
expect "a client CA without its CRL: refused at start" 2 "every client CA needs its CRL" -- \
  "$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --tls-cert "$pki/localhost.crt" \
  --tls-key "$pki/localhost.key" --tls-client-ca "$tmp/both-cas.crt" --tls-crl "$pki/crl.pem"
echo "not a CRL" >"$tmp/junk.crl"
expect "an unreadable CRL: refused at start" 2 "no CRL could be read" -- \
  "$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --tls-cert "$pki/localhost.crt" \
  --tls-key "$pki/localhost.key" --tls-client-ca "$pki/ca.crt" --tls-crl "$tmp/junk.crl"
cp "$pki/crl.pem" "$tmp/served.crl"
tls_server() {  # LOG [extra flags]: starts the TLS server with the CRL, sets server_pid, port
  local log="$1"
  shift
  "$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http 127.0.0.1:0 --workers 1 \
    --tls-cert "$pki/localhost.crt" --tls-key "$pki/localhost.key" --tls-client-ca "$pki/ca.crt" \
    --tls-crl "$tmp/served.crl" "$@" 2>"$log" &
  server_pid=$!
  read -r port http_port <<<"$(serving_port "$log" "$server_pid")"
}
tls_server "$tmp/crl.log"
expect "with a CRL: a good vehicle is served" 0 "map version" -- \
  "$cli" describe --server "localhost:$port" "${good[@]}"
expect "a revoked vehicle is refused" 1 "TLS" -- "$cli" describe --server "localhost:$port" \
  --tls-ca "$pki/ca.crt" --tls-cert "$pki/vehicle-8.crt" --tls-key "$pki/vehicle-8.key"
grep -q '"tls_refused":"certificate verify failed: certificate revoked"' "$tmp/crl.log" &&
  ok "... logged as revoked" || bad "revoked refusal not logged: $(tail -2 "$tmp/crl.log")"
next_update="$(date -d "$(openssl crl -in "$tmp/served.crl" -noout -nextupdate | cut -d= -f2)" +%s)"
metrics="$(exec 4<>"/dev/tcp/127.0.0.1/$http_port"; printf 'GET /metrics HTTP/1.0\r\n\r\n' >&4; cat <&4)"
grep -q "^sightfix_tls_crl_next_update_seconds $next_update$" <<<"$metrics" &&
  ok "/metrics exposes the CRL's nextUpdate ($next_update)" ||
  bad "no CRL metric: $(grep crl <<<"$metrics")"
# A live connection of vehicle-7, then vehicle-7 revoked and SIGHUP: closed, and refused anew.
(sleep 20) | openssl s_client -connect "127.0.0.1:$port" -CAfile "$pki/ca.crt" -alpn sightfix/1 \
  -cert "$pki/vehicle-7.crt" -key "$pki/vehicle-7.key" >"$tmp/live.txt" 2>&1 &
live_pid=$!
# Wait for its handshake to finish (s_client prints the verification after it).
for _ in $(seq 1 150); do grep -q "Verify return code" "$tmp/live.txt" && break; sleep 0.1; done
bash "$certs" "$pki" revoke vehicle-7 && cp "$pki/crl.pem" "$tmp/served.crl"
kill -HUP "$server_pid"
for _ in $(seq 1 200); do grep -q '"tls_reloaded"' "$tmp/crl.log" && break; sleep 0.1; done
grep -q '"event":"tls_revoked_peer_closed".*"client":"vehicle-7"' "$tmp/crl.log" &&
  grep -q '"tls_reloaded".*"closed":1' "$tmp/crl.log" &&
  ok "SIGHUP with a new CRL closes the live connection of the vehicle it revokes" ||
  bad "revoked live connection: $(grep -E 'tls_' "$tmp/crl.log" | tail -3)"
kill "$live_pid" 2>/dev/null; wait "$live_pid" 2>/dev/null
expect "... and refuses it anew" 1 "TLS" -- "$cli" describe --server "localhost:$port" "${good[@]}"
bash "$certs" "$pki" vehicle vehicle-10 >/dev/null
good10=(--tls-ca "$pki/ca.crt" --tls-cert "$pki/vehicle-10.crt" --tls-key "$pki/vehicle-10.key")
cp "$tmp/junk.crl" "$tmp/served.crl"
kill -HUP "$server_pid"
for _ in $(seq 1 200); do grep -q '"tls_reload_failed"' "$tmp/crl.log" && break; sleep 0.1; done
grep -q '"tls_reload_failed"' "$tmp/crl.log" && ok "SIGHUP with a bad CRL: logged" || bad "bad CRL reload not logged"
expect "... and the last good CRL keeps serving" 0 "map version" -- \
  "$cli" describe --server "localhost:$port" "${good10[@]}"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""
# A CRL past its nextUpdate: enforced and accepted within the grace, every vehicle refused after.
CRL_ARGS="-crlsec 1" bash "$certs" "$pki" crl && cp "$pki/crl.pem" "$tmp/served.crl"
sleep 2
tls_server "$tmp/stale.log"
expect "a CRL past its nextUpdate, within the grace (168 h): a good vehicle is served" 0 \
  "map version" -- "$cli" describe --server "localhost:$port" "${good10[@]}"
expect "... a revoked one still refused" 1 "TLS" -- "$cli" describe --server "localhost:$port" "${good[@]}"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""
tls_server "$tmp/stale0.log" --tls-crl-grace-h 0
expect "past the grace: every vehicle is refused" 1 "TLS" -- \
  "$cli" describe --server "localhost:$port" "${good10[@]}"
grep -q '"tls_refused":"certificate verify failed: CRL has expired"' "$tmp/stale0.log" &&
  ok "... logged as CRL has expired" || bad "stale CRL refusal: $(tail -1 "$tmp/stale0.log")"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""

# Fair shares before the client is known: one handshake in progress per address. A stalled
# handshake holds the slot; a client arriving meanwhile is closed at once and retries with
# backoff until the slot frees (the stall cut off, here by closing it after a second).
"$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http "" --workers 1 \
  --max-handshakes-per-address 1 --tls-cert "$pki/localhost.crt" --tls-key "$pki/localhost.key" \
  --tls-client-ca "$pki/ca.crt" 2>"$tmp/shares.log" &
server_pid=$!
port="$(serving_port "$tmp/shares.log" "$server_pid")"
exec 3<>"/dev/tcp/127.0.0.1/$port"
sleep 1
"$cli" describe --server "localhost:$port" "${good10[@]}" >"$tmp/waited.txt" 2>&1 3<&- &
waiter=$!
sleep 1
exec 3<&-
wait "$waiter" && grep -q "map version" "$tmp/waited.txt" &&
  grep -q '"tls_refused":"too many handshakes in progress (1 in all, 1 from this address)"' \
    "$tmp/shares.log" &&
  ok "a handshake beyond the per-address limit is closed at once; the client retries and is served" ||
  bad "handshake limit: $(cat "$tmp/waited.txt"; grep tls_refused "$tmp/shares.log" | head -2)"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""

# The HTTP port beyond loopback under TLS: TLS 1.3 with the server's certificate, a client
# certificate required (by default of the vehicles' CA, with its CRL), no ALPN needed; every
# refusal logged and counted as the query port's. A stalled handshake runs meanwhile.
bash "$certs" "$pki" crl && cp "$pki/crl.pem" "$tmp/served.crl"  # fresh: vehicle-7, -8 revoked
"$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http 0.0.0.0:0 --workers 1 \
  --tls-cert "$pki/localhost.crt" --tls-key "$pki/localhost.key" --tls-client-ca "$pki/ca.crt" \
  --tls-crl "$tmp/served.crl" 2>"$tmp/http.log" &
server_pid=$!
read -r port http_port <<<"$(serving_port "$tmp/http.log" "$server_pid")"
grep -q '"http_tls":true' "$tmp/http.log" && ok "an HTTP port on 0.0.0.0 under TLS: serving TLS" ||
  bad "HTTP port not under TLS: $(head -3 "$tmp/http.log")"
( start=$(date +%s); exec 3<>"/dev/tcp/127.0.0.1/$http_port"; timeout 20 cat <&3 >/dev/null
  echo $(($(date +%s) - start)) >"$tmp/http_stall.txt" ) &
stall_pid=$!
https() {  # PATH [curl options]: GET https://localhost:HTTP_PORT/PATH, body and status code
  local path="$1"
  shift
  curl -sS --max-time 10 --cacert "$pki/ca.crt" -w '\nstatus %{http_code}\n' "$@" \
    "https://localhost:$http_port$path" 2>&1
}
monitor10=(--cert "$pki/vehicle-10.crt" --key "$pki/vehicle-10.key")
out="$(https /healthz "${monitor10[@]}" -v)"
grep -q "^status 200" <<<"$out" && grep -q "^ok " <<<"$out" && grep -q "TLSv1.3" <<<"$out" &&
  ok "curl with a client certificate: /healthz 200 over TLS 1.3" || bad "healthz over TLS: $out"
out="$(https /metrics "${monitor10[@]}")"
grep -q "^status 200" <<<"$out" && grep -q "^sightfix_tiles_bad" <<<"$out" &&
  ok "... and the metrics text" || bad "metrics over TLS: $(head -3 <<<"$out")"
refusals_before=$(grep -c '"port":"http","tls_refused"' "$tmp/http.log")
https /healthz | grep -q "^status 000" && ok "no client certificate: refused" ||
  bad "HTTP port served a client without a certificate"
grep -q '"port":"http","tls_refused":"peer did not return a certificate' "$tmp/http.log" &&
  ok "... logged as the query port logs it" || bad "no-certificate refusal: $(tail -2 "$tmp/http.log")"
https /healthz --cert "$other/vehicle-9.crt" --key "$other/vehicle-9.key" | grep -q "^status 000" &&
  grep -q '"port":"http","tls_refused":"certificate verify failed: unable to get local issuer' \
    "$tmp/http.log" && ok "a certificate of another CA: refused" || bad "other-CA client on HTTP port"
https /healthz --cert "$pki/vehicle-7.crt" --key "$pki/vehicle-7.key" | grep -q "^status 000" &&
  grep -q '"port":"http","tls_refused":"certificate verify failed: certificate revoked"' \
    "$tmp/http.log" && ok "a revoked certificate: refused (the CRL applies to the same CA)" ||
  bad "revoked client on HTTP port: $(tail -2 "$tmp/http.log")"
https /healthz "${monitor10[@]}" --tls-max 1.2 | grep -q "^status 000" &&
  ok "TLS 1.2: refused" || bad "TLS 1.2 served on the HTTP port"
out="$(curl -sS --max-time 10 "http://127.0.0.1:$http_port/healthz" 2>&1)"
grep -q "speaks TLS 1.3 only" <<<"$out" &&
  grep -q '"port":"http","tls_refused":"plaintext sent to the TLS HTTP port"' "$tmp/http.log" &&
  ok "plaintext HTTP: refused, told so in plaintext, logged" || bad "plaintext HTTP: $out"
wait "$stall_pid"
waited="$(cat "$tmp/http_stall.txt")"
[ "$waited" -ge 8 ] && [ "$waited" -le 20 ] &&
  grep -q '"port":"http","tls_refused":"handshake not finished within the read timeout"' \
    "$tmp/http.log" && ok "a stalled HTTP handshake is cut off at the read timeout (${waited} s)" ||
  bad "stalled HTTP handshake: closed after ${waited} s"
refused=$(($(grep -c '"port":"http","tls_refused"' "$tmp/http.log") - refusals_before))
metrics="$(https /metrics "${monitor10[@]}")"
counted="$(sed -n 's/^sightfix_tls_refused_total //p' <<<"$metrics")"
[ "$refused" -ge 5 ] && [ "${counted:-0}" -ge "$refused" ] &&
  ok "/metrics counts the HTTP port's refusals ($counted, $refused logged here)" ||
  bad "refusals: $refused logged, counted ${counted:-none}"
bash "$certs" "$pki" revoke vehicle-10 && cp "$pki/crl.pem" "$tmp/served.crl"
kill -HUP "$server_pid"
for _ in $(seq 1 50); do
  https /healthz "${monitor10[@]}" | grep -q "^status 000" && break
  sleep 0.1
done
https /healthz "${monitor10[@]}" | grep -q "^status 000" &&
  ok "SIGHUP: the HTTP port rereads the CRL (vehicle-10 revoked, refused)" ||
  bad "HTTP port kept the old CRL after SIGHUP"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""
# A monitoring CA of its own: its certificates reach the HTTP port only, a vehicle's the query
# port only; the vehicles' CRL does not apply to it (the server starts).
mon="$tmp/monitoring"
CA_NAME="monitoring CA" bash "$certs" "$mon" ca >/dev/null && bash "$certs" "$mon" vehicle scraper-1 >/dev/null
bash "$certs" "$pki" vehicle vehicle-11 >/dev/null
"$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http 0.0.0.0:0 --workers 1 \
  --tls-cert "$pki/localhost.crt" --tls-key "$pki/localhost.key" --tls-client-ca "$pki/ca.crt" \
  --tls-crl "$tmp/served.crl" --http-client-ca "$mon/ca.crt" 2>"$tmp/monitor.log" &
server_pid=$!
read -r port http_port <<<"$(serving_port "$tmp/monitor.log" "$server_pid")"
https /healthz --cert "$mon/scraper-1.crt" --key "$mon/scraper-1.key" | grep -q "^status 200" &&
  ok "--http-client-ca: the monitoring certificate gets /healthz" ||
  bad "monitoring certificate: $(tail -2 "$tmp/monitor.log")"
https /healthz --cert "$pki/vehicle-11.crt" --key "$pki/vehicle-11.key" | grep -q "^status 000" &&
  ok "... a vehicle certificate does not" || bad "vehicle certificate served on the HTTP port"
expect "... and the monitoring certificate cannot call the query port" 1 "TLS" -- \
  "$cli" describe --server "localhost:$port" --tls-ca "$pki/ca.crt" --tls-cert "$mon/scraper-1.crt" \
  --tls-key "$mon/scraper-1.key"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""

# A fleet's life (README, "Certificates over a fleet's life"): a vehicle key made on the vehicle
# and only its request signed; a CA rolled over with both CAs and both CRLs served at once; and
# resumption checked by an independent peer (openssl s_client -sess_out / -sess_in).
next="$tmp/next"
CA_NAME="sightfix next CA" bash "$certs" "$next" ca >/dev/null && bash "$certs" "$next" crl &&
  bash "$certs" "$next" vehicle vehicle-20 >/dev/null &&
  (umask 077 && openssl genpkey -algorithm EC -pkeyopt ec_paramgen_curve:P-256 \
    -out "$tmp/on-vehicle.key" 2>/dev/null) &&
  openssl req -new -key "$tmp/on-vehicle.key" -subj "/CN=anything" -out "$tmp/on-vehicle.csr" &&
  bash "$certs" "$next" sign vehicle-21 "$tmp/on-vehicle.csr" &&
  ok "a second CA, and a vehicle certificate signed from a request made on the vehicle" ||
  bad "next CA or signing failed"
cat "$pki/ca.crt" "$next/ca.crt" >"$tmp/rollover-cas.crt"
cat "$pki/crl.pem" "$next/crl.pem" >"$tmp/rollover.crl"
"$server_bin" --map "$data/map" --listen 127.0.0.1:0 --http 127.0.0.1:0 --workers 1 \
  --tls-cert "$pki/localhost.crt" --tls-key "$pki/localhost.key" \
  --tls-client-ca "$tmp/rollover-cas.crt" --tls-crl "$tmp/rollover.crl" 2>"$tmp/rollover.log" &
server_pid=$!
read -r port http_port <<<"$(serving_port "$tmp/rollover.log" "$server_pid")"
bundle=(--tls-ca "$tmp/rollover-cas.crt")
expect "rollover: a vehicle of the old CA is served" 0 "map version" -- "$cli" describe \
  --server "localhost:$port" "${bundle[@]}" --tls-cert "$pki/vehicle-11.crt" --tls-key "$pki/vehicle-11.key"
expect "rollover: a vehicle of the new CA is served" 0 "map version" -- "$cli" describe \
  --server "localhost:$port" "${bundle[@]}" --tls-cert "$next/vehicle-20.crt" --tls-key "$next/vehicle-20.key"
expect "rollover: the certificate signed from the vehicle's request is served" 0 "map version" -- \
  "$cli" describe --server "localhost:$port" "${bundle[@]}" --tls-cert "$next/vehicle-21.crt" \
  --tls-key "$tmp/on-vehicle.key"
grep -q '"client":"vehicle-21"' "$tmp/rollover.log" &&
  ok "... named by the CA's choice of name, not the request's" || bad "signed vehicle not named"
expect "rollover: the old CA's revocations still hold" 1 "TLS" -- "$cli" describe \
  --server "localhost:$port" "${bundle[@]}" --tls-cert "$pki/vehicle-7.crt" --tls-key "$pki/vehicle-7.key"
resume() {  # s_client with vehicle-20, holding the connection open long enough to get a ticket
  (sleep 1) | timeout 10 openssl s_client -connect "127.0.0.1:$port" -CAfile "$pki/ca.crt" \
    -alpn sightfix/1 -cert "$next/vehicle-20.crt" -key "$next/vehicle-20.key" "$@" 2>&1
}
resume -sess_out "$tmp/session.pem" >/dev/null
resume -sess_in "$tmp/session.pem" | grep -q "^Reused, TLSv1.3" &&
  metrics="$(exec 4<>"/dev/tcp/127.0.0.1/$http_port"; printf 'GET /metrics HTTP/1.0\r\n\r\n' >&4; cat <&4)" &&
  grep -q "^sightfix_tls_resumed_total 1$" <<<"$metrics" &&
  ok "openssl s_client resumes a session, and the server counts it" ||
  bad "no resumption: $(grep resumed <<<"${metrics:-}")"
kill -TERM "$server_pid"; wait "$server_pid"; server_pid=""

# Independent peer: the client library against openssl s_server (TLS 1.3, ALPN, client
# certificate required). The handshake must complete with the vehicle's certificate presented.
sport=$((20000 + RANDOM % 20000))
(sleep 8) | openssl s_server -accept "127.0.0.1:$sport" -naccept 1 -tls1_3 -cert "$pki/localhost.crt" \
  -key "$pki/localhost.key" -CAfile "$pki/ca.crt" -Verify 1 -alpn sightfix/1 >"$tmp/s_server.txt" 2>&1 &
s_server_pid=$!
for _ in $(seq 1 150); do grep -aq ACCEPT "$tmp/s_server.txt" && break; sleep 0.1; done
"$cli" describe --server "localhost:$sport" "${good[@]}" >"$tmp/against_s_server.txt" 2>&1
wait "$s_server_pid" 2>/dev/null; s_server_pid=""
grep -aq "subject=CN = vehicle-7" "$tmp/s_server.txt" && grep -aq "CIPHER is TLS_" "$tmp/s_server.txt" &&
  grep -aq "ALPN protocols selected: sightfix/1" "$tmp/s_server.txt" &&
  ok "the client library against openssl s_server: TLS 1.3, ALPN, its certificate presented" ||
  bad "against s_server: $(grep -aE 'subject|CIPHER|ALPN|error' "$tmp/s_server.txt" | head -4)"
finish

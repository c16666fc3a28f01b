#!/usr/bin/env bash
# Makes a small certificate authority for sightfix's TLS (ECDSA P-256 keys, SHA-256 signatures)
# with `openssl`, and issues certificates from it:
#   make-certs.sh DIR ca                      DIR/ca.crt, DIR/ca.key (10 years) and the CA's
#                                             database for `openssl ca` (index, serial, CRL number)
#   make-certs.sh DIR server NAME [SAN...]    DIR/NAME.crt, DIR/NAME.key: a server certificate
#                                             whose subject alternative names are the SANs given
#                                             (DNS:host or IP:address; default DNS:NAME)
#   make-certs.sh DIR vehicle NAME [DAYS]     DIR/NAME.crt, DIR/NAME.key: a client certificate
#                                             whose common name NAME names the vehicle in the
#                                             server's logs (default 365 days)
#   make-certs.sh DIR sign NAME CSR [DAYS]    DIR/NAME.crt from a request made on the vehicle
#                                             (its key never leaves it); the common name is set
#                                             to NAME whatever the request says
#   make-certs.sh DIR revoke NAME             revokes DIR/NAME.crt and writes DIR/crl.pem
#   make-certs.sh DIR crl                     (re)writes DIR/crl.pem, valid 30 days
# Extra `openssl ca` arguments can be given in CA_ARGS when issuing (the tests use
# -startdate/-enddate to make an expired certificate) and in CRL_ARGS when writing a CRL (e.g.
# -crlhours 12; the tests use -crlsec 1 to make one that expires at once). Keys are written 0600.
# Keep ca.key offline in real use: whoever holds it can make vehicles.
set -euo pipefail
[ $# -ge 2 ] || { sed -n '2,20p' "$0" | sed 's/^# \{0,1\}//'; exit 2; }
dir="$1" what="$2"
shift 2
mkdir -p "$dir"
cnf="$dir/ca.cnf"
# The config reads the server SAN from the environment; every other step leaves it unused.
export SIGHTFIX_SAN="DNS:unused"

write_config() {
  cat >"$cnf" <<EOF
[ ca ]
default_ca = sightfix_ca
[ sightfix_ca ]
dir = $dir
database = \$dir/index.txt
new_certs_dir = \$dir/issued
serial = \$dir/serial
crlnumber = \$dir/crlnumber
certificate = \$dir/ca.crt
private_key = \$dir/ca.key
default_md = sha256
default_days = 365
default_crl_days = 30
policy = any_name
unique_subject = no
copy_extensions = none
[ any_name ]
commonName = supplied
[ server_ext ]
basicConstraints = critical, CA:FALSE
keyUsage = critical, digitalSignature
extendedKeyUsage = serverAuth
subjectAltName = \${ENV::SIGHTFIX_SAN}
[ vehicle_ext ]
basicConstraints = critical, CA:FALSE
keyUsage = critical, digitalSignature
extendedKeyUsage = clientAuth
[ ca_ext ]
basicConstraints = critical, CA:TRUE
keyUsage = critical, keyCertSign, cRLSign
subjectKeyIdentifier = hash
EOF
}

new_key() {
  (umask 077 && openssl genpkey -algorithm EC -pkeyopt ec_paramgen_curve:P-256 -out "$1" 2>/dev/null)
}

sign() {  # name, extension section, days, request
  local name="$1" ext="$2" days="$3" csr="$4"
  # shellcheck disable=SC2086
  openssl ca -batch -config "$cnf" -extensions "$ext" -days "$days" -notext -subj "/CN=$name" \
    -in "$csr" -out "$dir/$name.crt" ${CA_ARGS:-} 2>"$dir/$name.log" ||
    { cat "$dir/$name.log" >&2; exit 1; }
  rm -f "$dir/$name.log"
}

issue() {  # name, extension section, days
  local name="$1" ext="$2" days="$3"
  new_key "$dir/$name.key"
  openssl req -new -key "$dir/$name.key" -subj "/CN=$name" -out "$dir/$name.csr"
  sign "$name" "$ext" "$days" "$dir/$name.csr"
  rm -f "$dir/$name.csr"
}

case "$what" in
  ca)
    write_config
    mkdir -p "$dir/issued"
    : >"$dir/index.txt"
    echo 1000 >"$dir/serial"
    echo 1000 >"$dir/crlnumber"
    new_key "$dir/ca.key"
    openssl req -new -x509 -key "$dir/ca.key" -subj "/CN=${CA_NAME:-sightfix test CA}" \
      -days 3650 -config "$cnf" -extensions ca_ext -out "$dir/ca.crt"
    ;;
  server)
    name="${1:?server NAME}"
    shift
    san="DNS:$name"
    [ $# -gt 0 ] && san="$(IFS=,; echo "$*")"
    SIGHTFIX_SAN="$san" issue "$name" server_ext 365
    ;;
  vehicle)
    name="${1:?vehicle NAME}"
    issue "$name" vehicle_ext "${2:-365}"
    ;;
  sign)
    name="${1:?sign NAME CSR}" csr="${2:?sign NAME CSR}"
    openssl req -in "$csr" -noout -verify 2>/dev/null ||
      { echo "make-certs.sh: $csr is not a signed certificate request" >&2; exit 1; }
    sign "$name" vehicle_ext "${3:-365}" "$csr"
    ;;
  revoke)
    name="${1:?revoke NAME}"
    openssl ca -config "$cnf" -revoke "$dir/$name.crt" 2>/dev/null
    # shellcheck disable=SC2086
    openssl ca -config "$cnf" -gencrl -out "$dir/crl.pem" ${CRL_ARGS:-} 2>/dev/null
    ;;
  crl)
    # shellcheck disable=SC2086
    openssl ca -config "$cnf" -gencrl -out "$dir/crl.pem" ${CRL_ARGS:-} 2>/dev/null
    ;;
  *)
    echo "make-certs.sh: unknown step '$what' (ca, server, vehicle, sign, revoke or crl)" >&2
    exit 2
    ;;
esac

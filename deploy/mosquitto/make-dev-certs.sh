#!/usr/bin/env bash
# Makes a throw-away certificate authority and a broker certificate for
# trying deploy/compose.yaml. NOT for production: use certificates from
# the plant's own PKI there.
#
#   deploy/mosquitto/make-dev-certs.sh [extra DNS name ...]
#
# Writes deploy/mosquitto/certs/{ca.crt,ca.key,server.crt,server.key}.
# The server certificate names "mosquitto" (the compose service),
# "localhost" and 127.0.0.1, plus any names given.
set -euo pipefail
dir="$(cd "$(dirname "$0")" && pwd)/certs"
mkdir -p "$dir"
cd "$dir"
san="DNS:mosquitto,DNS:localhost,IP:127.0.0.1"
for n in "$@"; do san="$san,DNS:$n"; done
openssl req -x509 -newkey rsa:3072 -nodes -days 365 -subj "/CN=lifeledger dev CA" \
  -keyout ca.key -out ca.crt 2>/dev/null
openssl req -newkey rsa:3072 -nodes -subj "/CN=mosquitto" \
  -keyout server.key -out server.csr 2>/dev/null
openssl x509 -req -in server.csr -CA ca.crt -CAkey ca.key -CAcreateserial -days 365 \
  -extfile <(printf "subjectAltName=%s\nextendedKeyUsage=serverAuth\n" "$san") \
  -out server.crt 2>/dev/null
rm -f server.csr ca.srl
chmod 0644 ca.crt server.crt
# mosquitto 2 started as root drops to its own user (the Debian package's
# "mosquitto", uid 1883 in the eclipse-mosquitto image) BEFORE it reads the
# certificate files, so the server key must be readable by that user.
# These throw-away development keys are made readable by all; a production
# key from the plant's PKI belongs to the broker's group instead:
#   chgrp mosquitto server.key && chmod 0640 server.key
chmod 0644 server.key
# The CA key signs nothing the broker needs: only its maker reads it.
chmod 0600 ca.key
echo "wrote $dir (server names: $san)"

#!/bin/sh
# Installs the Debian packages fxledger builds and tests with, when missing.
# As root it runs apt-get; otherwise it prints the exact command and stops.
set -eu

PKGS="cmake make gcc g++ pkg-config libsqlite3-dev libcjson-dev libhpdf-dev \
libcmocka-dev libsodium-dev libdcmtk-dev libutf8proc-dev zlib1g-dev sqlite3 qpdf \
poppler-utils fonts-dejavu-core python3 python3-pydicom dcmtk tzdata tmux \
libmicrohttpd-dev chromium chromium-driver python3-selenium man-db \
lintian dpkg-dev file openssl time python3-fonttools"

missing=""
for p in $PKGS; do
    if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
        missing="$missing $p"
    fi
done

[ -z "$missing" ] && exit 0

if [ "$(id -u)" -eq 0 ]; then
    echo "installing missing Debian packages:$missing"
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq
    apt-get install -y -qq --no-install-recommends $missing
else
    echo "fxledger needs these Debian packages:$missing" >&2
    echo "run: sudo apt-get install -y$missing" >&2
    exit 1
fi

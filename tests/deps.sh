#!/bin/sh
# Install the Debian packages tidepost needs to build and test, if missing.
# Runs apt-get as root, or through sudo when available.
set -e
PKGS="build-essential pkg-config libcjson-dev libcurl4-openssl-dev \
libserialport-dev libcmocka-dev python3 python3-gsw socat openssl clang \
libclang-rt-14-dev man-db groff-base systemd valgrind clang-format cppcheck librsvg2-bin"
missing=""
for p in $PKGS; do
	dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" ||
		missing="$missing $p"
done
[ -z "$missing" ] && exit 0
echo "deps: installing:$missing"
SUDO=""
if [ "$(id -u)" != 0 ]; then
	command -v sudo >/dev/null 2>&1 || { echo "deps: need root or sudo to install:$missing" >&2; exit 1; }
	SUDO=sudo
fi
export DEBIAN_FRONTEND=noninteractive
$SUDO apt-get update -qq
# shellcheck disable=SC2086
$SUDO apt-get install -y -qq --no-install-recommends $missing

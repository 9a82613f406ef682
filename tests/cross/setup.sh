#!/bin/sh
# tests/cross/setup.sh ARCH - make this Debian 12 machine able to build
# tidepost for ARCH (arm64 or armhf) and run it under qemu-user: the cross
# compiler, qemu-user, ARCH as a dpkg foreign architecture (multiarch),
# and the ARCH builds of the libraries tidepost links (cJSON, libcurl with
# OpenSSL, libserialport, cmocka) plus pkgconf:ARCH, which provides the
# TRIPLET-pkg-config wrapper.  They co-install with the amd64 -dev
# packages (all Multi-Arch: same).  Does nothing when all is there.
# Runs apt-get as root or through sudo.
set -eu
ARCH=${1:-}
case "$ARCH" in
arm64) TRIPLET=aarch64-linux-gnu ;;
armhf) TRIPLET=arm-linux-gnueabihf ;;
*) echo "usage: sh tests/cross/setup.sh arm64|armhf" >&2; exit 2 ;;
esac
HOST_PKGS="gcc-$TRIPLET binutils-$TRIPLET libc6-dev-$ARCH-cross qemu-user"
ARCH_PKGS="libcjson-dev libcurl4-openssl-dev libserialport-dev \
libcmocka-dev pkgconf"

SUDO=""
if [ "$(id -u)" != 0 ]; then
	command -v sudo >/dev/null 2>&1 ||
		{ echo "cross: need root or sudo to install packages" >&2; exit 1; }
	SUDO=sudo
fi
export DEBIAN_FRONTEND=noninteractive

installed() {
	dpkg-query -W -f='${Status}' "$1" 2>/dev/null |
		grep -q "install ok installed"
}

updated=0
update() {
	[ "$updated" = 1 ] && return 0
	$SUDO apt-get update -qq
	updated=1
}

if ! dpkg --print-foreign-architectures | grep -qx "$ARCH"; then
	echo "cross: dpkg --add-architecture $ARCH"
	$SUDO dpkg --add-architecture "$ARCH"
	update
fi
missing=""
for p in $HOST_PKGS; do
	installed "$p" || missing="$missing $p"
done
for p in $ARCH_PKGS; do
	installed "$p:$ARCH" || missing="$missing $p:$ARCH"
done
[ -z "$missing" ] && exit 0
echo "cross: installing:$missing"
# shellcheck disable=SC2086
if ! $SUDO apt-get install -y -qq --no-install-recommends $missing \
	>/dev/null 2>&1; then
	update
	# shellcheck disable=SC2086
	$SUDO apt-get install -y -qq --no-install-recommends $missing
fi

#!/bin/sh
# Installs the Debian packages omen needs when they are missing, and says so.
#   deps.sh build   libraries and tools to build git-omen
#   deps.sh test    everything `make check` uses (cmocka, references, linters)
set -e
what=${1:-build}
need=""
has_pc() { pkg-config --exists "$1" 2>/dev/null; }
has_deb() { dpkg-query -W -f='${Status}' "$1" 2>/dev/null | grep -q "ok installed"; }

command -v pkg-config >/dev/null 2>&1 || need="$need pkg-config"
command -v cc >/dev/null 2>&1 || need="$need gcc"
command -v make >/dev/null 2>&1 || need="$need make"
command -v git >/dev/null 2>&1 || need="$need git"
has_pc libgit2 || need="$need libgit2-dev"
has_pc libcjson || need="$need libcjson-dev"
if [ "$what" = test ]; then
	has_pc cmocka || need="$need libcmocka-dev"
	for p in python3-torch python3-sklearn python3-numpy mandoc valgrind python3-jsonschema chromium \
		libopenmpi-dev openmpi-bin; do
		has_deb "$p" || need="$need $p"
	done
fi
[ -z "$need" ] && exit 0
echo "deps: installing Debian packages:$need" >&2
if [ "$(id -u)" -ne 0 ]; then
	if command -v sudo >/dev/null 2>&1; then SUDO=sudo; else
		echo "deps: missing packages:$need (run as root: apt-get install -y$need)" >&2
		exit 1
	fi
fi
${SUDO:-} apt-get update -qq >&2
DEBIAN_FRONTEND=noninteractive ${SUDO:-} apt-get install -y -qq --no-install-recommends $need >&2

#!/bin/sh
# Lints the man pages with mandoc; any warning fails.
[ $# -eq 0 ] && { echo "manlint: no man pages"; exit 0; }
command -v mandoc >/dev/null || { echo "manlint: mandoc is not installed" >&2; exit 1; }
mandoc -Tlint -W warning "$@" || exit 1
echo "manlint: $# pages clean"

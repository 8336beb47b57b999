#!/bin/sh
# Every omen.* key the sources read has a row in the settings table
# (src/history/config.c): a key without one is refused at run time, so a new
# setting added without its row would fail only when a user sets it.
set -eu
: "${ROOT:?set ROOT to the repository}"
table=$(sed -n '/^static const omen_setting settings_table\[\] = {/,/^};/p' "$ROOT/src/history/config.c" |
	grep -oE '\{"omen\.[A-Za-z]+"' | tr -d '{"' | sort -u)
[ -n "$table" ] || { echo "no settings table found in src/history/config.c"; exit 1; }
used=$(grep -rhoE '"omen\.[A-Za-z]+"' "$ROOT/src" | tr -d '"' | sort -u)
missing=$(printf '%s\n' "$used" | while read -r k; do
	printf '%s\n' "$table" | grep -qx "$k" || echo "$k"; done)
if [ -n "$missing" ]; then
	echo "settings read in src/ without a row in the settings table:"; echo "$missing"; exit 1
fi
echo "settings_keys: $(printf '%s\n' "$used" | wc -l) keys read, all in the table"

#!/bin/sh
# Installs the Debian packages named as arguments when any is missing.
# As root: apt-get install -y (apt-get update first when a package is unknown).
# Otherwise: prints the exact apt-get line and fails.
missing=""
for p in "$@"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q 'install ok installed' || missing="$missing $p"
done
[ -z "$missing" ] && exit 0
if [ "$(id -u)" != 0 ]; then
    echo "station: missing Debian packages; run:" >&2
    echo "  sudo apt-get install -y$missing" >&2
    exit 1
fi
echo "station: installing$missing" >&2
export DEBIAN_FRONTEND=noninteractive
if ! apt-cache show $missing >/dev/null 2>&1; then
    apt-get update -q || exit 1
fi
apt-get install -y -q --no-install-recommends $missing || {
    apt-get update -q && apt-get install -y -q --no-install-recommends $missing
}

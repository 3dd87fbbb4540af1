#!/usr/bin/env bash
# Installs the Debian packages accrue needs to build and test, when any are missing.
# As root it runs apt-get update and apt-get install; otherwise it prints the
# exact command and stops, so nothing is half-installed behind the user's back.
set -euo pipefail

packages=(
  g++ cmake make pkg-config
  libboost-dev libboost-system-dev
  libserialport-dev libsqlite3-dev sqlite3
  nlohmann-json3-dev catch2 libsystemd-dev
  libgsl-dev libbenchmark-dev
  python3 python3-numpy python3-scipy
  dpkg-dev systemd
  chromium  # tests/e2e/plot_render.sh renders accrue plot's SVG headless
)

missing=()
for p in "${packages[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q 'install ok installed' || missing+=("$p")
done
[ ${#missing[@]} -eq 0 ] && exit 0

if [ "$(id -u)" -ne 0 ]; then
  echo "accrue: these Debian packages are missing: ${missing[*]}" >&2
  echo "accrue: install them as root with:" >&2
  echo "  apt-get update && apt-get install -y ${missing[*]}" >&2
  exit 1
fi
echo "accrue: installing ${missing[*]}" >&2
export DEBIAN_FRONTEND=noninteractive
apt-get update -qq
apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null

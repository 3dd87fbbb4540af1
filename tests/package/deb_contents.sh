#!/usr/bin/env bash
# The Debian package builds with CPack from this build tree and holds the
# binaries, the unit, the sysusers/tmpfiles snippets, the example config and docs.
set -euo pipefail
build=$1
command -v dpkg-deb >/dev/null || { echo "dpkg-deb not installed: skipped"; exit 77; }
work=$(mktemp -d /tmp/accrue-deb.XXXXXX)
trap 'rm -rf "$work"' EXIT
cpack --config "$build/CPackConfig.cmake" -G DEB -B "$work" >"$work/cpack.log" 2>&1 || { cat "$work/cpack.log"; exit 1; }
deb=$(ls "$work"/*.deb)
dpkg -c "$deb" | awk '{print $NF}' >"$work/files"
for f in ./usr/sbin/accrued ./usr/bin/accrue ./usr/bin/accrue-sim \
         ./usr/lib/systemd/system/accrued@.service ./usr/lib/sysusers.d/accrue.conf ./usr/lib/tmpfiles.d/accrue.conf \
         ./usr/share/doc/accrue/README.md ./usr/share/doc/accrue/PROTOCOL.md ./usr/share/doc/accrue/api.md \
         ./usr/share/doc/accrue/copyright ./usr/share/doc/accrue/examples/accrued.example.json \
         ./usr/share/doc/accrue/examples/99-accrue.rules.example; do
  grep -qx -- "$f" "$work/files" || { echo "missing from the package: $f"; cat "$work/files"; exit 1; }
done
# (read whole first: grep -q closing the pipe early would fail the pipeline under pipefail)
info=$(dpkg-deb -I "$deb")
grep -q "Depends:.*libserialport0" <<<"$info" || { echo "$info"; exit 1; }
dpkg-deb -I "$deb" postinst >/dev/null
echo "$(basename "$deb"): $(wc -l <"$work/files") entries, all expected files present"

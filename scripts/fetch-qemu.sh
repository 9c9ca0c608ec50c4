#!/usr/bin/env bash
# Unpack Debian's qemu-system-arm into target/qemu without installing it: installing the
# package on this image would replace the machine's own qemu-utils. Downloads the .debs of
# qemu-system-arm and the shared libraries it needs that the machine lacks, extracts them
# with dpkg -x, and checks that the binary runs. Prints the path of a wrapper script.
set -euo pipefail
cd "$(dirname "$0")/.."
dest=target/qemu
wrapper=$dest/qemu-arm-system
if [ -x "$wrapper" ] && "$wrapper" -version >/dev/null 2>&1; then
    echo "$wrapper"; exit 0
fi
mkdir -p "$dest/debs" "$dest/root"
[ -n "$(ls /var/lib/apt/lists/*Packages* 2>/dev/null)" ] || apt-get update >/dev/null
# qemu-system-arm and every package it needs, recursively, that the machine lacks.
pkgs=()
for p in $(apt-cache depends --recurse --no-recommends --no-suggests --no-conflicts \
        --no-breaks --no-replaces --no-enhances qemu-system-arm | grep -v '^ ' | grep -v '^<' | sort -u); do
    if ! dpkg -s "$p" >/dev/null 2>&1; then pkgs+=("$p"); fi
done
(cd "$dest/debs" && apt-get download "${pkgs[@]}" 2>/dev/null >/dev/null)
for deb in "$dest"/debs/*.deb; do dpkg -x "$deb" "$dest/root"; done
lib="$PWD/$dest/root/usr/lib/x86_64-linux-gnu:$PWD/$dest/root/lib/x86_64-linux-gnu"
cat > "$wrapper" <<SH
#!/usr/bin/env bash
export LD_LIBRARY_PATH="$lib\${LD_LIBRARY_PATH:+:\$LD_LIBRARY_PATH}"
exec "$PWD/$dest/root/usr/bin/qemu-system-arm" -L "$PWD/$dest/root/usr/share/qemu" "\$@"
SH
chmod +x "$wrapper"
"$wrapper" -version >/dev/null
"$wrapper" -machine help | grep -q mps2-an386
echo "$wrapper"

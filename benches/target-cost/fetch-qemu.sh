#!/usr/bin/env bash
# Fetches Debian's qemu-system-arm (7.2) and the libraries it needs, and
# binutils-arm-none-eabi (for objdump), without installing them (installing
# the package can remove others from the machine image): `apt-get download` and
# `dpkg -x` into target/qemu, plus a wrapper that sets the library path.
# Prints the wrapper's path; objdump is at root/usr/bin/arm-none-eabi-objdump
# beside it.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
dest="$here/target/qemu"
wrapper="$dest/qemu-system-arm"
if [ -x "$wrapper" ] && "$wrapper" --version >/dev/null 2>&1 && [ -x "$dest/root/usr/bin/arm-none-eabi-objdump" ]; then
  echo "$wrapper"
  exit 0
fi
mkdir -p "$dest/debs" "$dest/root"
cd "$dest/debs"
pkgs="qemu-system-arm binutils-arm-none-eabi libfdt1 libcapstone4 libpmem1 librdmacm1 libibverbs1 libslirp0 libvdeplug2 libndctl6 libdaxctl1 libnl-3-200 libnl-route-3-200"
if ! apt-get download $pkgs >/dev/null 2>&1; then
  apt-get update -qq >/dev/null 2>&1 || true
  apt-get download $pkgs >/dev/null
fi
for d in *.deb; do dpkg -x "$d" "$dest/root"; done
cat >"$wrapper" <<WRAP
#!/usr/bin/env bash
export LD_LIBRARY_PATH="$dest/root/usr/lib/x86_64-linux-gnu:$dest/root/lib/x86_64-linux-gnu\${LD_LIBRARY_PATH:+:\$LD_LIBRARY_PATH}"
exec "$dest/root/usr/bin/qemu-system-arm" -L "$dest/root/usr/share/qemu" "\$@"
WRAP
chmod +x "$wrapper"
"$wrapper" --version | head -1 >&2
echo "$wrapper"

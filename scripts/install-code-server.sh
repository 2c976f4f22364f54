#!/usr/bin/env bash
# Installs code-server (VS Code in the browser, from the npm registry) into .cache/code-server
# for the end-to-end test, outside the project's own dependencies. Works offline except for
# the npm registry and Debian's packages. Does nothing when that version is already there.
# Each workaround below fixes an install failure seen on Debian 12 as root with npm 11.
set -euo pipefail
cd "$(dirname "$0")/.."

version=4.100.3   # the newest code-server whose engines.node allows Node 20
dest=.cache/code-server
installed="$dest/node_modules/code-server/package.json"

if [ -f "$installed" ] && [ -x "$dest/node_modules/.bin/code-server" ] &&
   node -e "process.exit(require('./$installed').version === '$version' ? 0 : 1)"; then
  echo "code-server $version is already in $dest"
  exit 0
fi

# ripgrep stands in for the binary that @vscode/ripgrep would download; the krb5 headers are
# for a native module that builds from source (as do a few others: g++, make, python3).
debs="ripgrep libkrb5-dev g++ make python3"
if ! dpkg -s $debs >/dev/null 2>&1; then
  apt_install="apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $debs"
  if [ "$(id -u)" = 0 ]; then sh -c "$apt_install"; else sudo sh -c "$apt_install"; fi
fi

scratch=$(mktemp -d)
trap 'rm -rf "$scratch"' EXIT
# @vscode/ripgrep 1.15.11 looks for a cached release archive in $TMPDIR before downloading.
rg_cache="$scratch/vscode-ripgrep-cache-1.15.11"
mkdir -p "$rg_cache/stage"
cp /usr/bin/rg "$rg_cache/stage/rg"
tar -czf "$rg_cache/ripgrep-v13.0.0-10-x86_64-unknown-linux-musl.tar.gz" -C "$rg_cache/stage" rg

rm -rf "$dest"
mkdir -p "$dest"
# Its own package.json, so npm treats the folder as its own project (not the repository's).
echo '{ "name": "factfoil-e2e-code-server", "private": true }' > "$dest/package.json"
(
  cd "$dest"
  # TMPDIR: the ripgrep cache above; XDG_*: code-server writes config there on every start.
  # unsafe_perm: its postinstall refuses to run as root without it; yes: a native module
  # runs `npx node-gyp`, which npx cancels where npm's config says yes=false.
  TMPDIR="$scratch" XDG_CONFIG_HOME="$scratch/config" XDG_DATA_HOME="$scratch/data" \
  npm_config_unsafe_perm=true npm_config_yes=true \
    npm install --no-audit --no-fund --loglevel=error "code-server@$version"
)
[ -x "$dest/node_modules/.bin/code-server" ] || { echo "code-server did not install into $dest" >&2; exit 1; }
echo "code-server $version installed in $dest"

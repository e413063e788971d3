#!/usr/bin/env bash
# Installs what the editor end-to-end test needs into a cache folder outside the repository, reusing it when present:
# code-server 4.100.3 (VS Code 1.100; the newest that runs on Node 20) from npm. Debian packages it relies on
# (chromium, ripgrep, libkrb5-dev) are installed by .ci/run, not here.
set -euo pipefail
CACHE="${REGWISE_E2E_CACHE:-$HOME/.cache/regwise-e2e}"
VERSION=4.100.3
DIR="$CACHE/code-server-$VERSION"
BIN="$DIR/node_modules/.bin/code-server"

if [ -x "$BIN" ] && [ -f "$DIR/.complete" ]; then
  echo "code-server $VERSION: cached in $DIR"
  exit 0
fi
for tool in rg chromium; do
  command -v "$tool" >/dev/null || { echo "setup.sh: $tool is missing (Debian packages: ripgrep chromium libkrb5-dev)" >&2; exit 1; }
done
rm -rf "$DIR"
mkdir -p "$DIR"
# a ripgrep dependency downloads a binary unless its cache holds one: seed it from Debian's rg
RG_CACHE="${TMPDIR:-/tmp}/vscode-ripgrep-cache-1.15.11"
mkdir -p "$RG_CACHE"
tar czf "$RG_CACHE/ripgrep-v13.0.0-10-x86_64-unknown-linux-musl.tar.gz" -C "$(dirname "$(command -v rg)")" rg
cd "$DIR"
echo '{ "name": "regwise-e2e-editor", "private": true }' > package.json
started=$(date +%s)
# --unsafe-perm: its install script refuses root otherwise; npm_config_yes: a nested `npx node-gyp` would ask
npm_config_yes=true npm_config_dangerously_allow_all_scripts=true \
  npm install --unsafe-perm --no-audit --no-fund --no-save "code-server@$VERSION"
[ -x "$BIN" ] || { echo "setup.sh: code-server did not install" >&2; exit 1; }
touch "$DIR/.complete"
echo "code-server $VERSION installed in $DIR in $(( $(date +%s) - started )) s"

#!/usr/bin/env bash
# Installs what the tests need beyond npm packages: Debian's PyTorch, scikit-learn and torchvision for the reference
# checks, Neovim as a second LSP client, Chromium/ripgrep/Kerberos headers for the editor test, then code-server.
# Idempotent: packages already present are left alone.
set -euo pipefail
cd "$(dirname "$0")/.."
PKGS=(python3-torch python3-sklearn python3-torchvision python3-yaml neovim chromium fonts-liberation ripgrep libkrb5-dev)
missing=()
for p in "${PKGS[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ ${#missing[@]} -gt 0 ]; then
  SUDO=""
  [ "$(id -u)" -eq 0 ] || SUDO="sudo"
  echo "setup: installing Debian packages: ${missing[*]}"
  $SUDO env DEBIAN_FRONTEND=noninteractive apt-get update -qq
  $SUDO env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
else
  echo "setup: Debian packages present"
fi
bash test/e2e/setup.sh

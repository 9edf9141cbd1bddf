#!/usr/bin/env bash
# Debian packages the tests need: socat (pseudo-terminal pairs for the serial end-to-end
# tests) and chromium (the live page's browser test). Installs only what is missing.
set -euo pipefail
need=()
command -v socat >/dev/null 2>&1 || need+=(socat)
command -v chromium >/dev/null 2>&1 || need+=(chromium)
if [ ${#need[@]} -eq 0 ]; then
  echo "test tools present: socat, chromium"
  exit 0
fi
sudo=""
if [ "$(id -u)" != 0 ]; then sudo="sudo"; fi
export DEBIAN_FRONTEND=noninteractive
$sudo apt-get update -qq
$sudo apt-get install -y -qq --no-install-recommends "${need[@]}"

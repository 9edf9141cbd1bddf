#!/usr/bin/env bash
# Debian packages the tests need: socat (pseudo-terminal pairs for the serial end-to-end
# tests), chromium (the live page's browser test) and mosquitto (the MQTT broker, with
# mosquitto_passwd, that the fleet tests and benchmark start on a loopback port of their own).
# Installs only what is missing.
set -euo pipefail
need=()
command -v socat >/dev/null 2>&1 || need+=(socat)
command -v chromium >/dev/null 2>&1 || need+=(chromium)
# /usr/sbin is not on every user's PATH.
[ -x /usr/sbin/mosquitto ] && [ -x /usr/bin/mosquitto_passwd ] || need+=(mosquitto)
if [ ${#need[@]} -eq 0 ]; then
  echo "test tools present: socat, chromium, mosquitto"
  exit 0
fi
sudo=""
if [ "$(id -u)" != 0 ]; then sudo="sudo"; fi
export DEBIAN_FRONTEND=noninteractive
$sudo apt-get update -qq
$sudo apt-get install -y -qq --no-install-recommends "${need[@]}"

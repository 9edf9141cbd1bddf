#!/usr/bin/env bash
# Debian packages the tests need, installed only when missing:
# - socat: pseudo-terminal pairs for the serial end-to-end tests;
# - chromium: the live page's browser test;
# - mosquitto (with mosquitto_passwd): the MQTT broker the fleet tests and benchmark start on a
#   loopback port of their own;
# - gcc-avr, avr-libc, binutils-avr: build the reference firmware (firmware/);
# - gcc, make, libc6-dev, pkg-config, libsimavr-dev, libsimavrparts1, libelf-dev: build the
#   emulated rig (test/firmware/), which runs that firmware on simavr's ATmega328P.
set -euo pipefail
packages=(socat chromium mosquitto gcc-avr avr-libc binutils-avr gcc make libc6-dev pkg-config
  libsimavr-dev libsimavrparts1 libelf-dev)
need=()
for p in "${packages[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || need+=("$p")
done
if [ ${#need[@]} -eq 0 ]; then
  echo "test tools present: ${packages[*]}"
  exit 0
fi
sudo=""
if [ "$(id -u)" != 0 ]; then sudo="sudo"; fi
export DEBIAN_FRONTEND=noninteractive
$sudo apt-get update -qq
$sudo apt-get install -y -qq --no-install-recommends "${need[@]}"

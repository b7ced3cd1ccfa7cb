#!/usr/bin/env bash
# install-dependencies.sh - installs, from Debian 12's apt repositories,
# everything mitilog needs to build, run and test. Idempotent: when every
# package is already installed it says so and returns without touching apt.
# Run as root (or as a user with sudo).
set -euo pipefail

packages=(
  # build
  build-essential cmake pkg-config g++
  libdcmtk-dev libsqlite3-dev libmicrohttpd-dev libgnutls28-dev
  libinih-dev libssl-dev zlib1g-dev
  # JPEG 2000 frames: DCMTK has no decoder for them, OpenJPEG decodes the
  # frame's fragments from memory (src/dicom/dcm_frame.cc)
  libopenjp2-7-dev
  # the simulator's scanners draw their screen text (`simulate --screens`)
  # with FreeType in fonts of Debian's font packages
  libfreetype-dev fonts-dejavu-core fonts-liberation2 fonts-freefont-ttf
  # the shared store for a group of sites: PostgreSQL's client library, and
  # the server itself for the tests (tests/postgresql/cluster.sh)
  libpq-dev postgresql
  # the integration tests read a PostgreSQL store directly (as they read the
  # SQLite file with Python's sqlite3) when MITILOG_TEST_ENGINE=postgresql
  python3-psycopg2
  # outbound HTTP for notifications (libcurl), multipart bodies of DICOMweb
  # STOW-RS requests (GMime)
  libcurl4-openssl-dev libgmime-3.0-dev
  # promtool checks the /metrics text format in the tests
  prometheus
  # unit tests
  libcmocka-dev
  # the code's layout, checked by tests/check-format.sh against .clang-format
  clang-format
  # fuzzing (tests/fuzz/run.sh): clang with libFuzzer and its sanitizer runtimes
  clang libclang-rt-14-dev
  # run and operate: DCMTK tools (storescu, echoscu, img2dcm), sqlite3 CLI,
  # curl for the HTTP API, openssl for TLS certificates
  dcmtk sqlite3 curl openssl
  # benchmarks: wrk measures the HTTP API's latency (bench/query.py)
  wrk
  # integration tests: pydicom is the independent parser (NumPy decodes the
  # simulator's pixel data for it), Pillow makes the JPEG fixture,
  # dicom3tools' dciodvfy checks the fixtures against the IODs
  python3 python3-pydicom python3-pytest python3-pil python3-numpy dicom3tools
  # dashboard browser tests (tests/browser): headless Chromium driven by
  # playwright-core from npm (no downloaded browsers)
  chromium
  # printed reports: pdfinfo counts the pages of the PDF Chromium prints,
  # pdftoppm renders them to PNG (tests/integration/test_pack.py)
  poppler-utils
)

missing=()
# Node.js and npm: Debian's packages, unless the machine already has a
# Node.js that brings its own npm (e.g. a vendor build, which conflicts
# with Debian's npm package).
if ! command -v node >/dev/null 2>&1 || ! command -v npm >/dev/null 2>&1; then
  packages+=(nodejs npm)
fi
for package in "${packages[@]}"; do
  status=$(dpkg-query -W -f='${db:Status-Status}' "$package" 2>/dev/null || true)
  if [ "$status" != "installed" ]; then
    missing+=("$package")
  fi
done

if [ ${#missing[@]} -eq 0 ]; then
  echo "install-dependencies: all ${#packages[@]} packages already installed, nothing to do"
  exit 0
fi

if [ "$(id -u)" -eq 0 ]; then
  as_root=()
elif command -v sudo >/dev/null 2>&1; then
  as_root=(sudo)
else
  echo "install-dependencies: missing packages (${missing[*]}) and not root, no sudo" >&2
  exit 1
fi

echo "install-dependencies: installing ${missing[*]}"
"${as_root[@]}" apt-get update
"${as_root[@]}" env DEBIAN_FRONTEND=noninteractive \
  apt-get install -y --no-install-recommends "${packages[@]}"
echo "install-dependencies: done"

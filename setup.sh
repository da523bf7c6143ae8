#!/usr/bin/env bash
# One-step set-up for bandgeo on a fresh Debian machine (run as root, or with sudo for the system part).
#   bash setup.sh demo   install everything, then run the whole job on a bundled sample specimen
#   bash setup.sh test   install everything, then run the test suite
set -euo pipefail
cd "$(dirname "$0")"
mode="${1:-demo}"
case "$mode" in demo|test|install) ;; *) echo "usage: bash setup.sh demo|test|install" >&2; exit 2;; esac

# System packages: open3d needs libusb and OpenGL/OpenMP runtimes; the browser tests need Chromium;
# the PDF checks need pdftoppm (poppler-utils); WeasyPrint (the PDF report) needs Pango, HarfBuzz and a font.
SYSTEM_PACKAGES="libusb-1.0-0 libgl1 libgomp1 chromium poppler-utils libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz-subset0 fonts-dejavu-core"
if command -v apt-get >/dev/null 2>&1; then
  SUDO=""; [ "$(id -u)" = 0 ] || SUDO="sudo"
  missing=""
  for p in $SYSTEM_PACKAGES; do dpkg -s "$p" >/dev/null 2>&1 || missing="$missing $p"; done
  if [ -n "$missing" ]; then
    echo "setup: installing system packages:$missing"
    $SUDO apt-get update -qq
    DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends $missing >/dev/null
  fi
else
  echo "setup: not a Debian system; install the equivalents of: $SYSTEM_PACKAGES" >&2
fi

PY="${PYTHON:-python3}"
echo "setup: installing bandgeo and its Python dependencies"
"$PY" -m pip install -q --disable-pip-version-check -e ".[test]" 2>&1 | grep -v -E "^WARNING: (Location|Running pip as)" || true
"$PY" -c "import bandgeo, open3d, trimesh, sklearn, astropy" || { echo "setup: the install failed" >&2; exit 1; }

export OMP_NUM_THREADS="${OMP_NUM_THREADS:-2}"
case "$mode" in
  demo)
    # The bundled sample specimen KRB-07 (a forward-model column; see sample_meshes/README.md).
    bandgeo analyze sample_meshes/KRB-07_annual.ply --sheet sample_meshes/KRB-07.sheet.toml \
      --out demo-output/KRB-07
    echo "setup: open demo-output/KRB-07/report.html to read the report;"
    echo "       'bandgeo review demo-output/KRB-07' opens the review page"
    ;;
  test)
    # pytest exit status 5 (no tests collected) is a failure here.
    set +e
    "$PY" -m pytest -q -p no:cacheprovider "${@:2}"
    status=$?
    set -e
    if [ "$status" = 5 ]; then echo "setup: no tests were collected" >&2; exit 1; fi
    exit "$status"
    ;;
esac

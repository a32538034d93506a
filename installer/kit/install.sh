#!/bin/sh
# Install Tenure @VERSION@ from this offline kit (Linux, macOS). Nothing here reaches the network.
#
#   sh install.sh [--prefix DIR] [--python PYTHON] [--system] [--no-launcher]
#
# 1. checks the SHA-256 of every file in the kit (SHA256SUMS) and names any damaged one;
# 2. finds a Python the kit has wheels for (@PYTHONS@) and checks the platform;
# 3. creates a virtual environment in PREFIX/venv and installs Tenure with pip --no-index
#    from wheels/ only;
# 4. adds a launcher (a desktop entry) and a `tenure` command link;
# 5. on Linux, checks the system libraries Qt needs for the window and says what to install.
#
# Default PREFIX: ~/.local/share/tenure (with --system: /opt/tenure, launcher for every user,
# `tenure` linked into /usr/local/bin). An existing installation in PREFIX is replaced;
# workbooks and settings live elsewhere and are kept.
# Exit codes: 0 installed; 2 not installed (damaged kit, no suitable Python, bad usage).

set -eu

KIT=$(cd "$(dirname "$0")" && pwd)
PREFIX=""
PYTHON=""
SYSTEM=0
LAUNCHER=1

fail() {
    echo "error: $1" >&2
    exit 2
}

while [ $# -gt 0 ]; do
    case "$1" in
        --prefix) [ $# -ge 2 ] || fail "--prefix: needs a folder"; PREFIX=$2; shift 2 ;;
        --python) [ $# -ge 2 ] || fail "--python: needs a Python program"; PYTHON=$2; shift 2 ;;
        --system) SYSTEM=1; shift ;;
        --no-launcher) LAUNCHER=0; shift ;;
        -h|--help) sed -n '2,17p' "$0" | sed 's/^# \{0,1\}//'; exit 0 ;;
        *) fail "install.sh: unknown option $1 (see --help)" ;;
    esac
done

info() { sed -n "s/^$1=//p" "$KIT/kit-info.txt"; }

# --- 1. checksums, before anything else is read or run -------------------------------------
[ -f "$KIT/SHA256SUMS" ] || fail "kit: SHA256SUMS is missing; copy the whole kit again"
if command -v sha256sum >/dev/null 2>&1; then
    hash_of() { sha256sum "$1" | cut -d' ' -f1; }
elif command -v shasum >/dev/null 2>&1; then
    hash_of() { shasum -a 256 "$1" | cut -d' ' -f1; }
else
    fail "kit: neither sha256sum nor shasum is installed, so the kit cannot be checked"
fi
bad=""
count=0
while IFS= read -r line || [ -n "$line" ]; do
    [ -n "$line" ] || continue
    want=${line%%  *}
    name=${line#*  }
    count=$((count + 1))
    if [ ! -f "$KIT/$name" ]; then
        bad="$bad
  missing: $name"
    elif [ "$(hash_of "$KIT/$name")" != "$want" ]; then
        bad="$bad
  damaged: $name"
    fi
done < "$KIT/SHA256SUMS"
if [ -n "$bad" ]; then
    echo "error: kit: these files are damaged or missing (copy the kit again; nothing was installed):$bad" >&2
    exit 2
fi
echo "Checked $count files against SHA256SUMS: all intact."

VERSION=$(info version)
PYTHONS=$(info pythons)
PLATFORMS=$(info platforms)
GLIBC=$(info glibc)

# --- 2. platform and Python ------------------------------------------------------------------
case "$(uname -s)" in
    Linux) system=linux ;;
    Darwin) system=macos ;;
    *) fail "platform: $(uname -s) is not covered by this kit (use install.ps1 on Windows)" ;;
esac
case "$(uname -m)" in
    x86_64|amd64) arch=x86_64 ;;
    aarch64|arm64) arch=$([ "$system" = macos ] && echo arm64 || echo aarch64) ;;
    *) arch=$(uname -m) ;;
esac
here="$system-$arch"
case " $PLATFORMS " in
    *" $here "*) ;;
    *) fail "platform: this kit holds wheels for $PLATFORMS, not $here; build one with: python3 installer/build_kit.py --platform $here" ;;
esac
if [ "$system" = linux ] && [ "$GLIBC" != "-" ] && command -v getconf >/dev/null 2>&1; then
    have=$(getconf GNU_LIBC_VERSION 2>/dev/null | sed -n 's/^glibc //p')
    if [ -n "$have" ] && [ "$(printf '%s\n%s\n' "$GLIBC" "$have" | sort -V | head -n1)" != "$GLIBC" ]; then
        fail "platform: this kit needs glibc $GLIBC or newer; this system has $have"
    fi
fi

py_version() { "$1" -c 'import sys; print("%d.%d" % sys.version_info[:2])' 2>/dev/null; }
if [ -z "$PYTHON" ]; then
    for v in $(echo "$PYTHONS" | tr ' ' '\n' | sort -r -V); do
        if command -v "python$v" >/dev/null 2>&1; then PYTHON=$(command -v "python$v"); break; fi
    done
fi
if [ -z "$PYTHON" ] && command -v python3 >/dev/null 2>&1; then PYTHON=$(command -v python3); fi
[ -n "$PYTHON" ] || fail "python: no Python found; install Python $PYTHONS (e.g. apt-get install python3) or name one with --python"
PYV=$(py_version "$PYTHON") || fail "python: $PYTHON does not run"
case " $PYTHONS " in
    *" $PYV "*) ;;
    *) fail "python: $PYTHON is Python $PYV; this kit holds wheels for Python $PYTHONS (name another with --python, or build a kit with --python $PYV)" ;;
esac

# --- 3. virtual environment and packages, from wheels/ only -----------------------------------
if [ -z "$PREFIX" ]; then
    if [ "$SYSTEM" = 1 ]; then PREFIX=/opt/tenure; else PREFIX=${XDG_DATA_HOME:-$HOME/.local/share}/tenure; fi
fi
mkdir -p "$PREFIX" || fail "$PREFIX: cannot create the folder"
PREFIX=$(cd "$PREFIX" && pwd)
echo "Installing Tenure $VERSION with Python $PYV ($PYTHON) into $PREFIX ..."
rm -rf "$PREFIX/venv"
"$PYTHON" -m venv --without-pip "$PREFIX/venv" || fail "python: cannot create a virtual environment with $PYTHON (on Debian/Ubuntu: apt-get install python3-venv)"
PIP_WHEEL=$(ls "$KIT"/wheels/pip-*.whl 2>/dev/null | sort -V | tail -n1)
[ -n "$PIP_WHEEL" ] || fail "kit: wheels/pip-*.whl is missing"
# No pip configuration file, environment variable or cache is read or written: only wheels/.
PIP_CONFIG_FILE=/dev/null "$PREFIX/venv/bin/python" "$PIP_WHEEL/pip" install --isolated \
    --no-index --find-links "$KIT/wheels" --no-cache-dir --disable-pip-version-check -q \
    pip "tenure==$VERSION" \
    || fail "pip: installing from the kit failed (see above); nothing was taken from the network"
"$PREFIX/venv/bin/tenure" --help >/dev/null || fail "tenure: the installed command does not start"
cp "$KIT/tenure.png" "$PREFIX/tenure.png"

# --- 4. launcher and command ----------------------------------------------------------------
if [ "$LAUNCHER" = 1 ]; then
    if [ "$SYSTEM" = 1 ]; then
        apps=/usr/share/applications
        bindir=/usr/local/bin
    else
        apps=${XDG_DATA_HOME:-$HOME/.local/share}/applications
        bindir=$HOME/.local/bin
    fi
    if [ "$system" = linux ]; then
        mkdir -p "$apps"
        cat > "$apps/tenure.desktop" <<EOF
[Desktop Entry]
Type=Application
Name=Tenure
GenericName=Keep-or-replace studies
Comment=Keep-or-replace decisions for production equipment
Exec="$PREFIX/venv/bin/tenure"
Icon=$PREFIX/tenure.png
Terminal=false
Categories=Office;Engineering;
EOF
        echo "Launcher: $apps/tenure.desktop"
    fi
    mkdir -p "$bindir"
    ln -sf "$PREFIX/venv/bin/tenure" "$bindir/tenure"
    echo "Command: $bindir/tenure"
fi

# --- 5. system libraries for the window (Linux) ---------------------------------------------
if [ "$system" = linux ]; then
    if report=$("$PREFIX/venv/bin/python" -m desktop_app.system_libs --platform xcb); then
        echo "System libraries for the window: all present."
    else
        echo ""
        echo "The command line works, but the window needs system libraries that are missing:"
        echo "  $report"
        echo "Install them from the distribution's packages (with no internet: copy the .deb"
        echo "files made by 'apt-get download PACKAGES' on a connected machine of the same"
        echo "release, then 'sudo apt-get install ./*.deb')."
    fi
fi
echo "Tenure $VERSION is installed. Start it from the applications menu, or run: $PREFIX/venv/bin/tenure"

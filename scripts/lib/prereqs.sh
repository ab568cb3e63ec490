# Shared set-up for scripts/demo and scripts/test: make sure the system prerequisites are
# present. Installs them with apt-get when run as root on Debian/Ubuntu; otherwise prints the
# exact command to run and stops.
# Needs: a Rust toolchain (cargo), pkg-config, the HDF5 C library with headers
# (libhdf5-dev), the HDF5 command-line tools (hdf5-tools), and Python 3 with venv.

linegrid_root() { cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd; }

ensure_prereqs() {
    local missing=()
    command -v pkg-config >/dev/null 2>&1 || missing+=(pkg-config)
    if ! pkg-config --exists hdf5 2>/dev/null && [ ! -e /usr/include/hdf5/serial/hdf5.h ]; then
        missing+=(libhdf5-dev)
    fi
    command -v h5dump >/dev/null 2>&1 || missing+=(hdf5-tools)
    if command -v python3 >/dev/null 2>&1; then
        python3 -c 'import ensurepip, venv' >/dev/null 2>&1 || missing+=(python3-venv)
    else
        missing+=(python3 python3-venv)
    fi
    if [ ${#missing[@]} -gt 0 ]; then
        if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
            echo "linegrid: installing system packages: ${missing[*]}"
            export DEBIAN_FRONTEND=noninteractive
            apt-get update -qq
            apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
        else
            echo "linegrid: missing system packages: ${missing[*]}" >&2
            echo "run:  sudo apt-get install -y --no-install-recommends ${missing[*]}" >&2
            exit 2
        fi
    fi
    if ! command -v cargo >/dev/null 2>&1; then
        if [ -x "$HOME/.cargo/bin/cargo" ]; then
            export PATH="$HOME/.cargo/bin:$PATH"
        else
            echo "linegrid: no Rust toolchain found; install one with rustup (https://rustup.rs), then rerun" >&2
            exit 2
        fi
    fi
}

# Create (once) the Python virtual environment for the cross-checks and print its python.
ensure_venv() {
    local root venv stamp req
    root=$(linegrid_root)
    venv="$root/.venv"
    req="$root/tests/python/requirements.txt"
    stamp="$venv/.requirements.sha"
    local want
    want=$(sha256sum "$req" | cut -d' ' -f1)
    if [ ! -x "$venv/bin/python" ] || [ "$(cat "$stamp" 2>/dev/null)" != "$want" ]; then
        echo "linegrid: preparing the Python cross-check environment in .venv" >&2
        python3 -m venv "$venv" >&2
        "$venv/bin/python" -m pip install --quiet --disable-pip-version-check --upgrade pip >&2
        "$venv/bin/python" -m pip install --quiet --disable-pip-version-check -r "$req" >&2
        echo "$want" > "$stamp"
    fi
    echo "$venv/bin/python"
}

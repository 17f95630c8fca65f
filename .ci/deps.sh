#!/usr/bin/env bash
# deps.sh: install what trajvault needs on a Debian machine, only when it is
# missing. Used by the Makefile (make demo, make test) and by CI.
#
#   .ci/deps.sh build   C library and pkg-config for the cgo HDF5 layer
#   .ci/deps.sh test    also the independent readers used by the tests and
#                       Chromium, which renders the audit report in a test
#   .ci/deps.sh bench   also the compressors the benchmark compares with
#   .ci/deps.sh go      print the path of a Go toolchain, fetching one from
#                       the Go module proxy when none is installed
set -euo pipefail

GO_FALLBACK=1.26.8 # used only when no Go is installed; at least the go.mod version

APT_EXTRA=

sudo_() {
	if [ "$(id -u)" = 0 ]; then "$@"; else sudo "$@"; fi
}

apt_install() {
	local missing=()
	for p in "$@"; do
		dpkg -s "$p" >/dev/null 2>&1 || missing+=("$p")
	done
	[ ${#missing[@]} -eq 0 ] && return 0
	echo "deps: installing ${missing[*]} with apt-get" >&2
	sudo_ apt-get update -qq >&2
	sudo_ env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $APT_EXTRA "${missing[@]}" >&2
}

find_go() {
	if command -v go >/dev/null 2>&1; then command -v go; return; fi
	if [ -x /usr/local/go/bin/go ]; then echo /usr/local/go/bin/go; return; fi
	local root dir
	root="$(cd "$(dirname "$0")/.." && pwd)"
	dir="$root/.tools/go$GO_FALLBACK"
	if [ ! -x "$dir/bin/go" ]; then
		apt_install curl unzip ca-certificates
		echo "deps: fetching Go $GO_FALLBACK from the Go module proxy" >&2
		local zip
		zip="$(mktemp)"
		curl -fsSL -o "$zip" "https://proxy.golang.org/golang.org/toolchain/@v/v0.0.1-go$GO_FALLBACK.linux-amd64.zip"
		rm -rf "$dir.tmp" && mkdir -p "$dir.tmp"
		unzip -q "$zip" -d "$dir.tmp"
		rm -f "$zip"
		mv "$dir.tmp/golang.org/toolchain@v0.0.1-go$GO_FALLBACK.linux-amd64" "$dir"
		rm -rf "$dir.tmp"
		chmod +x "$dir/bin/"* "$dir/pkg/tool/"*/* 2>/dev/null || true
	fi
	echo "$dir/bin/go"
}

case "${1:-}" in
build) apt_install libhdf5-dev pkg-config gcc ;;
test)
	apt_install libhdf5-dev pkg-config gcc hdf5-tools python3-h5py python3-ase python3-scipy python3-mdanalysis chromium
	# A throw-away single-node SLURM for the job-array test (no services
	# are started by installing; the test runs the daemons itself).
	APT_EXTRA=--no-install-recommends apt_install slurmctld slurmd slurm-client munge
	;;
bench) apt_install libhdf5-dev pkg-config gcc zstd xz-utils gzip time ;;
go) find_go ;;
*) echo "usage: $0 build|test|bench|go" >&2; exit 2 ;;
esac

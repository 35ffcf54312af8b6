#!/usr/bin/env bash
# Gathers the pool of openly licensed colour photographs that the shipped model is trained on.
#
# Every photo is listed one by one in models/photo-list.tsv (package, version, path inside the package,
# author, licence, use, note, subject). This script downloads those Debian packages with apt-get, unpacks
# them into a temporary folder and copies each listed file, byte for byte, to TARGET/<name> (names are
# <package>--<original file name>; see models/PHOTO_SOURCES.md). Rows whose use is "demo" are the demo
# album's originals: they are held out of the pool and copied only with --demo DIR.
#
# Usage: models/gather-photos.sh [--demo DIR] [--debs DIR] [TARGET]   (TARGET defaults to .data/pool)
#   --demo DIR  also copy the demo rows (full size) to DIR, for demo-photos/make-scans.mjs --from DIR
#   --debs DIR  keep the downloaded .deb files in DIR and reuse them on the next run
# Needs: Debian or a derivative with apt reachable (run `apt-get update` once first), dpkg-deb, and node
# with this repository's node_modules installed (`npm ci`), for the packed formats (.rcc, .edj, .jar) and
# the summary (count, megapixels, digest, photos per subject).
set -euo pipefail

root="$(cd "$(dirname "$0")/.." && pwd)"
list="$root/models/photo-list.tsv"
target="$root/.data/pool"
demo=""
debs=""
while [ $# -gt 0 ]; do
  case "$1" in
    --demo) demo="${2:?--demo needs a folder}"; shift 2 ;;
    --debs) debs="${2:?--debs needs a folder}"; shift 2 ;;
    -h|--help) sed -n '2,15p' "$0"; exit 0 ;;
    -*) echo "gather-photos: unknown option $1 (see --help)" >&2; exit 2 ;;
    *) target="$1"; shift ;;
  esac
done

for tool in apt-get dpkg-deb node; do
  command -v "$tool" >/dev/null || { echo "gather-photos: $tool not found; this script needs a Debian system with node" >&2; exit 1; }
done
[ -d "$root/node_modules/sharp" ] || { echo "gather-photos: run 'npm ci' in $root first (sharp is needed)" >&2; exit 1; }

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
chmod 755 "$work"
if [ -z "$debs" ]; then debs="$work/debs"; fi
mkdir -p "$debs" "$target"
[ -z "$demo" ] || mkdir -p "$demo"
# apt-get download drops privileges to _apt where it can; let it write there to avoid a warning
chmod a+rwx "$debs" 2>/dev/null || true

# 1. download and unpack each package once, at the version the list was made from when apt still offers it
awk -F'\t' 'NR > 1 && $1 != "" { print $2 "\t" $3 }' "$list" | sort -u | while IFS=$'\t' read -r pkg ver; do
  file="$(ls "$debs/${pkg}_"*.deb 2>/dev/null | head -n 1 || true)"
  if [ -z "$file" ]; then
    if ! (cd "$debs" && apt-get download -q "$pkg=$ver" >/dev/null 2>&1); then
      echo "gather-photos: $pkg $ver is no longer offered; taking the current version (check the photos against PHOTO_SOURCES.md)" >&2
      (cd "$debs" && apt-get download -q "$pkg" >/dev/null) || {
        echo "gather-photos: could not download $pkg; run 'apt-get update' and try again" >&2; exit 1; }
    fi
    file="$(ls "$debs/${pkg}_"*.deb | head -n 1)"
  fi
  got="$(dpkg-deb -f "$file" Version)"
  [ "$got" = "$ver" ] || echo "gather-photos: $pkg is $got, the list was made from $ver" >&2
  mkdir -p "$work/root/$pkg"
  dpkg-deb -x "$file" "$work/root/$pkg"
done

# 2. copy the listed photos; the demo rows never go into the pool
pool_names="$work/pool-names"
: >"$pool_names"
n_pool=0
n_demo=0
while IFS=$'\t' read -r name pkg ver path author licence use _rest; do
  [ -n "$name" ] || continue
  case "$use" in
    pool) out="$target/$name"; echo "$name" >>"$pool_names"; n_pool=$((n_pool + 1)) ;;
    demo) [ -n "$demo" ] || continue; out="$demo/$name"; n_demo=$((n_demo + 1)) ;;
    *) echo "gather-photos: $name: unknown use '$use' in $list" >&2; exit 1 ;;
  esac
  case "$path" in
    *'!'*) node "$root/models/extract-photo.mjs" "$work/root/$pkg" "$path" "$out.tmp" ;;
    *) cp "$work/root/$pkg/$path" "$out.tmp" ;;
  esac
  mv "$out.tmp" "$out"
done < <(tail -n +2 "$list")

# 3. files from an older list (same naming pattern, no longer listed) would make the pool differ: remove them
for f in "$target"/*--*; do
  [ -e "$f" ] || continue
  grep -qxF "$(basename "$f")" "$pool_names" || { echo "gather-photos: removing $(basename "$f") (not in the list)"; rm -f "$f"; }
done

# 4. summary: count, megapixels, and one digest of the whole pool (the same list gives the same digest)
digest="$(cd "$target" && sort "$pool_names" | xargs -d '\n' sha256sum | sha256sum | cut -c1-16)"
(cd "$root" && node --input-type=module -e '
  import sharp from "sharp";
  import { readFileSync } from "node:fs";
  const [dir, namesFile] = process.argv.slice(1);
  const names = readFileSync(namesFile, "utf8").split("\n").filter(Boolean);
  let px = 0;
  for (const n of names) { const m = await sharp(`${dir}/${n}`).metadata(); px += m.width * m.height; }
  console.log(`pool: ${names.length} photos, ${(px / 1e6).toFixed(1)} megapixels in ${dir}`);
' "$(cd "$target" && pwd)" "$pool_names")
echo "pool digest: $digest"
awk -F'\t' 'NR > 1 && $7 == "pool" { n[$9]++ } END { for (s in n) printf "%s %d\n", s, n[s] }' "$list" | sort \
  | awk '{ line = line (NR > 1 ? ", " : "") $1 " " $2 } END { print "pool subjects: " line }'
[ -z "$demo" ] || echo "demo originals: $n_demo photos in $demo (held out of the pool)"

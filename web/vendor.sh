#!/bin/sh
# vendor.sh refreshes the chart library the page uses (uPlot, MIT licence)
# from the npm registry into web/static/vendor/uplot. No build step: the page
# loads the prebuilt files as they ship in the package.
#
# Usage: sh web/vendor.sh [version]     (default: the version pinned below)
set -eu
VERSION="${1:-1.6.32}"
here="$(cd "$(dirname "$0")" && pwd)"
dest="$here/static/vendor/uplot"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
(cd "$tmp" && npm pack --silent "uplot@$VERSION" >/dev/null)
tar -xzf "$tmp"/uplot-"$VERSION".tgz -C "$tmp"
mkdir -p "$dest"
cp "$tmp/package/dist/uPlot.iife.min.js" "$dest/uPlot.iife.min.js"
cp "$tmp/package/dist/uPlot.min.css" "$dest/uPlot.min.css"
cp "$tmp/package/LICENSE" "$dest/LICENSE"
printf 'uplot %s (npm), MIT licence, see LICENSE\n' "$VERSION" >"$dest/VERSION"
echo "vendored uplot $VERSION into $dest"

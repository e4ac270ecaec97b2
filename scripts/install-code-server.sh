#!/usr/bin/env bash
# Installs code-server 4.100.3 (VS Code 1.100.3 in the browser, the newest that runs on Node 20) for the end-to-end
# test, into a cache folder outside the repository, without the downloads its install scripts would make.
# Usage: scripts/install-code-server.sh [FOLDER]  (default: $NOISEWISE_E2E_CACHE or $HOME/.cache/noisewise-e2e).
# Needs the Debian packages libkrb5-dev, pkg-config and ripgrep (and chromium for the test itself); prints the path
# of the code-server launcher on its last line. Running it again when the install is complete does nothing.
set -euo pipefail

VERSION=4.100.3
dest="${1:-${NOISEWISE_E2E_CACHE:-$HOME/.cache/noisewise-e2e}}"
prefix="$dest/code-server-$VERSION"
pkg="$prefix/node_modules/code-server"
launcher="$pkg/out/node/entry.js"
marker="$prefix/.complete"

if [ -f "$marker" ] && [ -f "$launcher" ]; then
  echo "$launcher"
  exit 0
fi

for tool in rg pkg-config; do
  command -v "$tool" >/dev/null || { echo "install-code-server: $tool is missing: apt-get install -y libkrb5-dev pkg-config ripgrep" >&2; exit 1; }
done

rm -rf "$prefix"
mkdir -p "$prefix"
cd "$prefix"
echo '{ "name": "noisewise-e2e-code-server", "private": true }' > package.json
export npm_config_yes=true npm_config_fund=false npm_config_audit=false npm_config_update_notifier=false

# 1. code-server without its install scripts (they download VS Code's built-in extensions and binaries).
npm install --no-save --ignore-scripts "code-server@$VERSION" >&2
npm rebuild argon2 >&2

# 2. VS Code's own runtime dependencies, with ripgrep taken from Debian instead of downloaded.
(
  cd "$pkg/lib/vscode"
  npm install --omit=dev --ignore-scripts >&2
  mkdir -p node_modules/@vscode/ripgrep/bin
  ln -sf "$(command -v rg)" node_modules/@vscode/ripgrep/bin/rg
  npm rebuild >&2
)

# 3. The links the skipped postinstall would have made.
(
  cd "$pkg/lib/vscode"
  ln -sfn node_modules node_modules.asar
  cd bin/remote-cli && ln -sf code-linux.sh code-server
  cd ../helpers && ln -sf browser-linux.sh browser.sh
)

# 4. The built-in extensions' dependencies (the Markdown preview among them).
(cd "$pkg/lib/vscode/extensions" && npm install --omit=dev >&2)

touch "$marker"
echo "$launcher"

"""Rule sets bundled with the auditor (TOML data; the build maps this folder into the package)."""

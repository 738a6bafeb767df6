"""Bundled limit tables (TOML data files). Copy one, edit it, and pass its path with --limits."""

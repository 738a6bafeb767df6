"""File helpers shared by every command.

- :mod:`pqcheck.files.atomic`: atomic, no-overwrite file writing;
- :mod:`pqcheck.files.toml`: TOML reading (``tomllib``), key-path to line numbers, inline
  TOML writing;
- :mod:`pqcheck.files.tomldoc`: the reader of user TOML documents (plans, site files);
- :mod:`pqcheck.files.inputs`: the check that an input is a regular file of bounded size.
"""

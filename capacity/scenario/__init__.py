"""Scenario stage: immutable layout objects (``types``), the TOML loader (``load``), validation (``validate``) and
the layout summary behind ``capacity check`` (``summary``). SI units throughout."""

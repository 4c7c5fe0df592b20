"""The evidence model (pydantic) and the loader that keeps YAML positions."""

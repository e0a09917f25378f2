"""Options only the report job has (Hydra finds them through this package: it needs this file)."""

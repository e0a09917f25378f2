"""Options only the canary job has (Hydra finds them through this package: it needs this file)."""

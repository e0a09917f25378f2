"""Options only the vocab job has (Hydra finds them through this package: it needs this file)."""

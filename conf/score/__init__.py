"""Options only the score job has (Hydra finds them through this package: it needs this file)."""

"""Options only the prepare job has (Hydra finds them through this package: it needs this file)."""

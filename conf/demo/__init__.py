"""Options only the demo job has (Hydra finds them through this package: it needs this file)."""

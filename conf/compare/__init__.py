"""Options only the compare job has (Hydra finds them through this package: it needs this file)."""

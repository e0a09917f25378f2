"""Options only the pretrain job has (Hydra finds them through this package: it needs this file)."""

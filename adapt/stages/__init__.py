"""The stages, each a run(cfg) -> result read top to bottom: prepare, pretrain, score, compare, demo."""

"""The on-disk hand-offs between stages, one reader/writer each: prepared corpus, labelled task, model folder,
pretrain run folder, checkpoint, manifest."""

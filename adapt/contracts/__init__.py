"""The on-disk hand-offs between stages, one reader/writer each: prepared corpus, labelled task, pretrain run
folder, checkpoint, manifest."""

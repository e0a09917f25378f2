"""Continued-pretraining mechanics: encoder loading, masking, packing, MLM loss, head warm-up, adapters, export."""

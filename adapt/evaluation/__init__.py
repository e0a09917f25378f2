"""Measuring models: pseudo-perplexity, fine-tuning, TF-IDF baseline, statistics."""

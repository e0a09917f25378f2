"""The prepare stage: read, clean, filter, deduplicate, scan for personal data, split and profile a corpus."""

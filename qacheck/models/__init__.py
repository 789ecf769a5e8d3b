"""Model wrappers: load once, lazily, verify digests, answer or draft in batches."""

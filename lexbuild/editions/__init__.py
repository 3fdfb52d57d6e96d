"""Editions: merging induced senses into the sources, numbered releases, diffs between editions."""

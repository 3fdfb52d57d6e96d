"""From a corpus to verb occurrences and frames: CoNLL-U, raw-text parsing, UD slots, counting."""

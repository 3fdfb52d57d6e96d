"""The dictionary itself: typed model, identifiers, YAML sources and consistency checks."""

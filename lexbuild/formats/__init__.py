"""Interchange formats: TEI Lex-0 and LMF writers and readers, published schemas, validation."""

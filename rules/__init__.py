"""The built-in rules: one module each, written against drc.api exactly as a house rule is."""

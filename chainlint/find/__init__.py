"""The finder: a textual screen, then chains of row filters located in the `ast`."""

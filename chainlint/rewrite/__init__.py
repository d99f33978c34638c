"""The rewriter: turns `reorder` findings into verified edits, and writes them safely."""

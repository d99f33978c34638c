"""The language server (`chainlint lsp`, extra `lsp`): diagnostics, quick fixes and hovers."""

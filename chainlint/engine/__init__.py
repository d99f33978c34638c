"""The engine: one options object, the analysis of files and documents, check, fixes and
measure's planning; every front end (command line, language server, notebook) calls it."""

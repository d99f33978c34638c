"""Reading and parsing source files, with every failure turned into a located error."""

"""The `rhledger` command line: thin click commands over the library packages."""

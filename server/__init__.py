"""The shell around the game core: HTTP pages, sockets, storage and the CLI."""

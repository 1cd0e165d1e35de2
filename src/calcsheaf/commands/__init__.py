"""Plain command functions; cli.py only parses arguments and calls these."""

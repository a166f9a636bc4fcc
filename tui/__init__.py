"""keyproof's terminal front end: the Textual app and the command line."""

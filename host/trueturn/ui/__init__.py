"""The Textual app: live meter, spectrum, guided balancing procedure, demo mode."""

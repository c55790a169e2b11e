"""The embedded, invented demo: synthetic captures, the demo fixture and trace."""

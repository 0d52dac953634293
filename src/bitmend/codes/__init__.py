"""Code families and the named catalog."""

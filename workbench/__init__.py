"""Core-loss workbench."""

"""Report writers: JSON, CSV profile and the beam picture."""

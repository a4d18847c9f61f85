"""The headless command-line face of vetting (no Textual here)."""

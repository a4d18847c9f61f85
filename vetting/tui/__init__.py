"""vetting.tui"""

"""vetting.records"""

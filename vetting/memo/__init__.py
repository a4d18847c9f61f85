"""vetting.memo"""

"""vetting.appraisal"""

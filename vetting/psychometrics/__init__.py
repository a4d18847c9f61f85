"""vetting.psychometrics"""

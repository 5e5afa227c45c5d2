"""airtaper.report"""

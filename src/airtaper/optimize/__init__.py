"""airtaper.optimize"""

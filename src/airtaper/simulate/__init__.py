"""airtaper.simulate"""

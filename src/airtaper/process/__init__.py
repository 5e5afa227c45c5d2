"""airtaper.process"""

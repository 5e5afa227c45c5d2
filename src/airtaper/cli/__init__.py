"""airtaper.cli"""

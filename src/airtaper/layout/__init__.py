"""airtaper.layout"""

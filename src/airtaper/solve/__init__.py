"""airtaper.solve"""

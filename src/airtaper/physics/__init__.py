"""airtaper.physics"""

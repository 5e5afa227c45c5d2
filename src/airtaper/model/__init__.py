"""airtaper.model"""

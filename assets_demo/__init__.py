"""The invented Tavlund Verkstad demo catalog (models written by make_catalog.py)."""

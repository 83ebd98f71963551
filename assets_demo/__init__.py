"""The invented Sawdust Lane Workshop demo catalog (models written by make_catalog.py)."""

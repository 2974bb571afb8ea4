"""The invented demonstration deposit and its truth."""

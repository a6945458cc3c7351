"""The phone: its pages, its socket events and the one view of what a phone may see."""

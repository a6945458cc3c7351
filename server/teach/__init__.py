"""Teaching: the debrief, handouts, the reveal and the teaching view."""

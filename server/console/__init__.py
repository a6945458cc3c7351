"""The console: the facilitator's pages, events, fall-backs, talk pauses and payment sheet."""

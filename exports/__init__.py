"""Tidy export tables shared by live sessions and the pilot simulator."""

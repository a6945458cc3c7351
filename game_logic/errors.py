"""Named exceptions of the game core; the shell maps them to clear messages."""


class EbbtideError(Exception):
    """Base of every error the core raises on purpose."""


class StudyError(EbbtideError):
    """A study design file is invalid; ``problems`` lists every reason."""

    def __init__(self, problems: list[str]):
        self.problems = list(problems)
        super().__init__("; ".join(self.problems))


class InvalidHarvest(EbbtideError):
    """A harvest request is not a whole number of units within the allowed range."""


class RoundClosed(EbbtideError):
    """The round (or block, or session) a decision was meant for is no longer open."""

"""Named exceptions of the analysis; the CLI turns them into clear messages."""

from ebbtide.game_logic.errors import EbbtideError


class ExportFolderError(EbbtideError):
    """An export folder is missing a file or does not follow the export contract."""

    code = "bad_export_folder"


class PoolError(EbbtideError):
    """Export folders cannot be pooled (different schemas or clashing sessions)."""

    code = "cannot_pool"

"""Where the installed package keeps its pages, static files, catalogues and example studies.

They are package data (``ebbtide.templates``, ``ebbtide.static``, ``ebbtide.translations``,
``ebbtide.examples``), found with ``importlib.resources`` so that an editable checkout, a
plain ``pip install`` and a wheel all serve the same files.
"""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path


def data_folder(name: str) -> Path:
    """The folder of one data package (``templates``, ``static``, ``translations``, ``examples``)."""
    # Installed from a wheel or a folder the package data lies on disk; Flask and Babel want paths.
    return Path(str(files(f"ebbtide.{name}")))


def example_study(file_name: str) -> Path:
    """One of the bundled example study files."""
    return data_folder("examples") / file_name

"""Paths of the repository's own files, for tests (never the working directory)."""

from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
RECORDINGS = REPO / "recordings"
DOCS = REPO / "docs"

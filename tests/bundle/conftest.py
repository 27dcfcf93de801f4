"""Fixtures of the bundle tests; the helpers live in bundle_support.py (a name unique across test
folders, so ``from bundle_support import ...`` never picks another folder's module)."""

from bundle_support import packed_toy, toy  # noqa: F401

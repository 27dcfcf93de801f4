"""The reviewer bundle: pack a study with a manifest and its environment; audit a bundle.

``pack`` writes one tar.gz archive; ``audit`` unpacks one safely (or takes an unpacked folder),
checks every hash, re-renders every case, re-runs a chosen subset and re-computes the
uncertainty table, and ends with a verdict.
"""

from .manifest import Manifest, VerifyResult, verify_tree
from .pack import PackResult, pack
from .review import AuditReport, RerunChoice, audit
from .unpack import safe_extract

__all__ = ["AuditReport", "Manifest", "PackResult", "RerunChoice", "VerifyResult", "audit", "pack",
           "safe_extract", "verify_tree"]

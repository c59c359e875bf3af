"""The benchmark library: store, fingerprints and suites.

>>> from instgen.library import Library, fingerprint, make_suite, verify_suite
"""

from .entry import Entry
from .fingerprint import canonical_form, carry_state, fingerprint
from .store import ENV_VAR, AddResult, Library, VerifyReport, default_location
from .suite import make_suite, pick_stratified, verify_suite

__all__ = ["AddResult", "ENV_VAR", "Entry", "Library", "VerifyReport", "canonical_form", "carry_state",
           "default_location", "fingerprint", "make_suite", "pick_stratified", "verify_suite"]

"""Test helpers that other code (and other people's samplers) can reuse.

>>> from instgen.testing import check_sampler
>>> check_sampler("sa", sweeps=200, reads=8)
"""

from .conformance import check_sampler, small_instances

__all__ = ["check_sampler", "small_instances"]

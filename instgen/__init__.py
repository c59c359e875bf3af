"""instgen: breed hard Ising problem instances with known ground states."""

from .errors import InstgenError
from .instance import Instance

__version__ = "0.1.0"

__all__ = ["Instance", "InstgenError", "__version__"]

# The compiled core (core/python/binding.cpp) carries no type information of its own;
# its calls are checked by the tests against the reference. To mypy it is untyped.
from typing import Any

def __getattr__(name: str) -> Any: ...

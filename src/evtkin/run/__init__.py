"""The run layer: plan → work units → partial results → merge; executors.

``evtkin.run(config, ...)`` is :func:`evtkin.run.pipeline.run`. Because ``evtkin.run`` is
also the name of this package (Python binds a subpackage to its parent's attribute when it
is imported), the package module itself is made callable and forwards to that function,
so ``evtkin.run(...)`` works whichever was touched first.
"""

from __future__ import annotations

import sys
import types
from typing import Any


class _CallableModule(types.ModuleType):
    def __call__(self, *args: Any, **kwargs: Any) -> Any:
        from evtkin.run.pipeline import run

        return run(*args, **kwargs)


sys.modules[__name__].__class__ = _CallableModule

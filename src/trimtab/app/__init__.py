"""The live what-if page and its HTTP API (``trimtab explore``): a thin layer over a built problem.

:class:`Explorer` holds one scenario open and re-solves it with new limits; :func:`create_app`
serves it (FastAPI on uvicorn), with the page's templates in :mod:`trimtab.report`.
"""

from trimtab.app._limits import Limit, scenario_limits
from trimtab.app._session import Explorer, Variant

__all__ = ["Explorer", "Limit", "Variant", "scenario_limits"]

"""Checks, one module per family; importing this package registers them all, in order."""
from . import registry  # noqa: F401
from . import context  # noqa: F401
from . import declared  # noqa: F401  (ids emitted by stages: schema.*, ingest.*)
from . import heat_capacity  # noqa: F401
from . import segments  # noqa: F401

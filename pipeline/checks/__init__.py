"""Checks, one module per family; importing this package registers them all, in order."""
from . import registry  # noqa: F401
from . import context  # noqa: F401
from . import declared  # noqa: F401  (ids emitted by stages: schema.*, ingest.*)
from . import heat_capacity  # noqa: F401
from . import segments  # noqa: F401
from . import extrapolation  # noqa: F401
from . import formation  # noqa: F401
from . import third_law  # noqa: F401
from . import composition  # noqa: F401
from . import tables  # noqa: F401
from . import duplicates  # noqa: F401
from . import phases  # noqa: F401
from . import reactions  # noqa: F401  (stage "network": residuals, cycles, network fit, second/third law)

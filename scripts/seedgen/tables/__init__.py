"""The tables: one module per class of compound, imported in the order the compounds are
listed (the order of `compounds.json` and of the manifest), then the 13C peak lists."""

from . import alcohols  # noqa: F401
from . import ketones  # noqa: F401
from . import aldehydes  # noqa: F401
from . import acids  # noqa: F401
from . import esters  # noqa: F401
from . import ethers  # noqa: F401
from . import aromatics  # noqa: F401
from . import chlorinated  # noqa: F401
from . import alkanes  # noqa: F401
from . import nitrogen  # noqa: F401
from .carbon13 import attach_carbon_tables

attach_carbon_tables()

"""partpick: standard-value part selection for sine oscillators, verified by circuit physics.

Public API (each a plain function of its inputs; only loaders and writers touch files):

- :mod:`partpick.units`     parse and format quantities (SI prefixes, RKM code of IEC 60062)
- :mod:`partpick.series`    IEC 60063 preferred-number series E3..E192
- :mod:`partpick.catalog`   part families (resistors, capacitors, op-amps, limiters): ``load_catalog``
- :mod:`partpick.stock`     parts on the shelf: ``load_stock``
- :mod:`partpick.spec`      the requirement: ``Spec.from_yaml``
- :mod:`partpick.errors`    the error family (``PartpickError`` and its children)

Importing ``partpick`` loads no heavy module (no ortools, no matplotlib).
"""

import os as _os

# partpick's linear algebra is small matrices (tens of unknowns) solved many times: a
# BLAS thread pool only adds hand-over cost, and on a busy machine its spinning threads
# slowed harmonic balance tenfold (measured). One thread each, unless the user set it.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    _os.environ.setdefault(_var, "1")

__version__ = "0.1.0"

__all__ = ["__version__"]

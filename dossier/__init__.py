"""dossier: tire force-and-moment rig data in, a traceable evaluation dossier out."""

import os as _os

# One BLAS thread per process, set before NumPy loads (a program that loaded NumPy earlier keeps
# its own setting; the worker processes still get this one). A build runs its own processes side
# by side on every core, and BLAS threads on top of them fight over the same cores: on two cores
# the fits took 2.2 times as long with the default threads as with one per process.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    _os.environ.setdefault(_name, "1")

__version__ = "0.1.0"

"""Plain numpy/scipy measures on arrays: phase coherence, spectra, ERP measures, rejection,
reliability, rhythms, blinks, group effect sizes, cross-validated rejection and
spherical-spline interpolation matrices.

Nothing here knows about configuration, the CLI, reports or mne objects; every function
takes arrays in SI units (V, s, Hz) and documents shapes. Each submodule's ``__all__`` is
its public surface; this package re-exports all of them.
"""
from heschl.numeric import (blinks, cohort, crossspectra, crossval, effects, erp, phase, rejection, reliability, rhythms,
                            spectra, splines)
from heschl.numeric.blinks import *  # noqa: F401,F403
from heschl.numeric.cohort import *  # noqa: F401,F403
from heschl.numeric.crossspectra import *  # noqa: F401,F403
from heschl.numeric.crossval import *  # noqa: F401,F403
from heschl.numeric.effects import *  # noqa: F401,F403
from heschl.numeric.erp import *  # noqa: F401,F403
from heschl.numeric.phase import *  # noqa: F401,F403
from heschl.numeric.rejection import *  # noqa: F401,F403
from heschl.numeric.reliability import *  # noqa: F401,F403
from heschl.numeric.rhythms import *  # noqa: F401,F403
from heschl.numeric.spectra import *  # noqa: F401,F403
from heschl.numeric.splines import *  # noqa: F401,F403

__all__ = [name for module in (phase, spectra, erp, rejection, crossspectra, reliability, cohort, rhythms, blinks,
                                 effects, crossval, splines)
           for name in module.__all__]

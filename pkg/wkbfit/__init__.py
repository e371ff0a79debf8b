"""wkbfit: WKB and exact levels of diatomic potentials, and potential fits to measured levels.

Units: energies in cm-1, distances in angstrom, masses in u.
"""
from ._core import HBAR2_OVER_2U, GSL_VERSION
from .masses import reduced_mass, isotope_mass, isotope_info, parse_isotopologue, as_reduced_mass
from .potentials import Potential, Morse, LennardJones, PoschlTeller, PointwisePotential
from .potentials import EMO, MLR
from .levels import LevelTable, levels
from .exact import exact_wavefunction, compare_wkb_exact, WKBComparison
from .observed import ObservedLevels, read_levels, DataWarning
from .lines import ObservedLines, read_lines, ObservedWidths, read_widths
from . import units
from .fitting import fit, FitResult
from .born_oppenheimer import BornOppenheimerCorrection
from .rkr import RKRTurningPoints, rkr_turning_points, rkr_potential
from .near_dissociation import near_dissociation_fit, NearDissociationFit
from . import plots  # figures; matplotlib itself is imported only when one is drawn
from .replicas import bootstrap, ReplicaResult
from .model_scan import scan_models, ModelScan

__version__ = "0.1.0"

"""Agreement and content-validity statistics (pure: numpy, pandas, scipy, krippendorff; no Flask, no SQL).

Data convention: judges in rows, items in columns, NaN = no answer (see :mod:`labelstudy.agreement._data`).

Modules, one topic each: ``alpha`` (Krippendorff's alpha and its bootstraps), ``kappa`` (Cohen, Light,
Fleiss), ``gwet`` (AC1, AC2, Brennan-Prediger, percent agreement), ``bands`` (interpretation words),
``cvi`` (I-CVI, S-CVI, modified kappa, Lawshe's CVR), ``itemsort`` (Anderson & Gerbing's psa and csv, hit
ratios, confusion, label ambiguity), ``opensort`` (co-occurrence, consensus partition, ARI/AMI),
``deffit`` (Hinkin & Tracey definition fit), ``judges`` (judge diagnostics), ``planning`` (plan_panel).
"""

from labelstudy.agreement._data import AgreementInputError, as_matrix, from_long, resolve_domain
from labelstudy.agreement.alpha import (KrippendorffAlpha, alpha_replicates, coincidences, distance_matrix,
                                        krippendorff_alpha, unit_bootstrap_indices)
from labelstudy.agreement.bands import BANDS, band
from labelstudy.agreement.gwet import (ChanceCorrected, PercentAgreement, brennan_prediger, gwet_ac1, gwet_ac2,
                                       gwet_weights, percent_agreement)
from labelstudy.agreement.kappa import (CohenKappa, FleissKappa, LightKappa, cohen_kappa, fleiss_kappa,
                                        kappa_weights, light_kappa, pairwise_kappa)

__all__ = [
    "AgreementInputError", "as_matrix", "from_long", "resolve_domain",
    "KrippendorffAlpha", "alpha_replicates", "coincidences", "distance_matrix", "krippendorff_alpha",
    "unit_bootstrap_indices", "BANDS", "band", "ChanceCorrected", "PercentAgreement", "brennan_prediger",
    "gwet_ac1", "gwet_ac2", "gwet_weights", "percent_agreement", "CohenKappa", "FleissKappa", "LightKappa",
    "cohen_kappa", "fleiss_kappa", "kappa_weights", "light_kappa", "pairwise_kappa",
]

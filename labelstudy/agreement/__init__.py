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
from labelstudy.agreement.cvi import (LAWSHE_1975_MINIMA, ScaleCVI, cvr_critical, icvi_standard, item_cvi,
                                      kappa_star_band, lawshe_cvr, meets_icvi_standard, modified_kappa,
                                      scale_cvi)
from labelstudy.agreement.deffit import DefinitionFit, definition_fit, holm, rm_anova
from labelstudy.agreement.itemsort import (HitRatios, confusion, critical_count, hit_ratios, item_sort,
                                           label_ambiguity)
from labelstudy.agreement.judges import judge_diagnostics, nominal_kappa, robust_z
from labelstudy.agreement.opensort import (ConsensusPartition, adjusted_mutual_info, adjusted_rand_index,
                                           co_occurrence, consensus_partition, match_clusters,
                                           partition_agreement, pile_names, silhouette)
from labelstudy.agreement.planning import PanelPlan, plan_panel

__all__ = [
    "AgreementInputError", "as_matrix", "from_long", "resolve_domain",
    "KrippendorffAlpha", "alpha_replicates", "coincidences", "distance_matrix", "krippendorff_alpha",
    "unit_bootstrap_indices", "BANDS", "band", "ChanceCorrected", "PercentAgreement", "brennan_prediger",
    "gwet_ac1", "gwet_ac2", "gwet_weights", "percent_agreement", "CohenKappa", "FleissKappa", "LightKappa",
    "cohen_kappa", "fleiss_kappa", "kappa_weights", "light_kappa", "pairwise_kappa",
    "LAWSHE_1975_MINIMA", "ScaleCVI", "cvr_critical", "icvi_standard", "item_cvi", "kappa_star_band",
    "lawshe_cvr", "meets_icvi_standard", "modified_kappa", "scale_cvi", "HitRatios", "confusion", "critical_count", "hit_ratios",
    "item_sort", "label_ambiguity", "ConsensusPartition", "adjusted_mutual_info", "adjusted_rand_index",
    "co_occurrence", "consensus_partition", "match_clusters", "partition_agreement", "pile_names",
    "silhouette", "DefinitionFit", "definition_fit", "holm", "rm_anova", "judge_diagnostics",
    "nominal_kappa", "robust_z", "PanelPlan", "plan_panel",
]

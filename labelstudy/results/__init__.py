"""Results a researcher can act on: score a round, apply decision rules, plot, export and report.

:func:`score_round` composes the statistics of :mod:`labelstudy.agreement` over a round's stored answers
into one frozen :class:`RoundResults`; every page, report and export is drawn from that object.
"""

from labelstudy.results.compare import Comparison, compare_rounds, earlier_round
from labelstudy.results.export import EXPORTS, export_bytes, write_all
from labelstudy.results.rules import Rules, RulesError, default_rules, load_rules, parse_rules
from labelstudy.results.score import CAUTIONS, RoundResults, clear_cache, score_round

__all__ = ["score_round", "RoundResults", "clear_cache", "CAUTIONS", "Rules", "RulesError", "load_rules",
           "default_rules", "parse_rules", "compare_rounds", "Comparison", "earlier_round", "EXPORTS",
           "export_bytes", "write_all"]

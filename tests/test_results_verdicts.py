"""Item and label verdicts follow the documented rules, including which checks are required."""

from __future__ import annotations

import json

import pytest

from labelstudy.results.rules import RulesError, default_rules, parse_rules
from labelstudy.results.verdicts import item_verdict, label_verdict


def rules_with(**values):
    return parse_rules(json.dumps({"rules": values}), where="test rules")


GOOD = {"hit_ratio": 0.9, "csv": 0.8, "csv_p": 0.01, "csv_significant": True, "i_cvi": 0.9,
        "icvi_standard": 0.78, "cvr": 0.8, "cvr_critical": 0.8, "cvr_meets": True,
        "deffit_verdict": "fits intended", "flags": ""}


def test_every_check_passing_keeps_the_item():
    assert item_verdict(GOOD, default_rules()) == ("keep", "every required check passed")


def test_a_non_required_check_is_noted_not_decisive():
    row = {**GOOD, "csv_significant": False, "csv": 0.6, "csv_p": 0.055, "cvr_meets": False, "cvr": 0.6}
    verdict, rule = item_verdict(row, default_rules())      # defaults: hit ratio and I-CVI are required
    assert verdict == "keep"
    assert "noted: csv 0.60 not significant (p = 0.055 >= 0.05)" in rule and "CVR 0.60 below" in rule


@pytest.mark.parametrize("placement,relevance,expected", [
    ("hit_ratio", "icvi", "keep"), ("csv", "icvi", "revise"), ("both", "icvi", "revise"),
    ("hit_ratio", "cvr", "revise"), ("hit_ratio", "both", "revise"),
])
def test_required_checks_follow_the_rules(placement, relevance, expected):
    row = {**GOOD, "csv_significant": False, "cvr_meets": False}
    rules = rules_with(placement_criterion=placement, relevance_criterion=relevance)
    assert item_verdict(row, rules)[0] == expected


def test_hit_ratio_icvi_flags_and_other_definition_revise_or_drop():
    rules = default_rules()
    assert item_verdict({**GOOD, "hit_ratio": 0.6}, rules) == ("revise", "hit ratio 0.60 < 0.70")
    assert item_verdict({**GOOD, "i_cvi": 0.7}, rules)[1] == "I-CVI 0.70 < 0.78"
    assert item_verdict({**GOOD, "flags": "cross_loading"}, rules)[0] == "revise"
    assert item_verdict({**GOOD, "deffit_verdict": "fits F4"}, rules)[0] == "revise"
    assert item_verdict({**GOOD, "deffit_verdict": "unclear"}, rules)[0] == "keep"
    assert item_verdict({**GOOD, "deffit_verdict": "unclear"},
                        rules_with(deffit_unclear_revises=True))[0] == "revise"
    assert item_verdict({**GOOD, "hit_ratio": 0.4, "i_cvi": 0.5}, rules)[0] == "drop"


def test_label_verdicts():
    rules, names = default_rules(), {"F2": "Neighbourly Ties"}
    assert label_verdict({"confusion_rate": 0.3, "most_confused": "F2", "hit_rate": 0.8}, rules, names)[0] == \
        "overlapping with F2"
    assert label_verdict({"confusion_rate": 0.1, "most_confused": "F2", "hit_rate": 0.6}, rules, names)[0] == \
        "ambiguous"
    assert label_verdict({"confusion_rate": 0.1, "most_confused": "F2", "hit_rate": 0.9, "entropy": 0.2,
                          "mean_clarity": 4.2}, rules, names)[0] == "clear"


@pytest.mark.parametrize("values,message", [
    ({"placement_criterion": "votes"}, "must be one of hit_ratio, csv, both"),
    ({"deffit_unclear_revises": "yes"}, "must be true or false"),
])
def test_bad_choice_rules_are_refused(values, message):
    with pytest.raises(RulesError, match=message):
        rules_with(**values)


def test_an_overlapping_label_also_reports_its_own_ambiguity():
    verdict, rule = label_verdict({"confusion_rate": 0.3, "most_confused": "F4", "hit_rate": 0.61,
                                   "mean_clarity": 2.9}, default_rules(), {"F4": "Harvest Sharing"})
    assert verdict == "overlapping with F4"
    assert rule == ("symmetric confusion rate with F4 (Harvest Sharing) 0.30 >= 0.25; ambiguous as well: "
                    "hit rate 0.61 < 0.70; mean clarity 2.90 < 3.00")

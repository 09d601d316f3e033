"""Skill stage: year-blocked cross-validation, scores, baselines, bootstrap and ranking."""

from impactlink.skill import scores
from impactlink.skill.best import BestCandidate, best_candidate
from impactlink.skill.folds import year_folds
from impactlink.skill.rank import TABLE_COLUMNS, SkillResult, SkillWarning, rank_candidates

__all__ = ["rank_candidates", "SkillResult", "SkillWarning", "TABLE_COLUMNS", "year_folds",
           "scores", "best_candidate", "BestCandidate"]

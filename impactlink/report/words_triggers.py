"""Words of the trigger plan section, built from the numbers of ``triggers.csv``."""

from __future__ import annotations

import pandas as pd

from impactlink.report.text import fmt_num

__all__ = ["trigger_comparison_sentence"]


def trigger_comparison_sentence(pooled: pd.DataFrame) -> str:
    """Uniform against local thresholds in one sentence, from the pooled rows
    (``county_id == "all"``) of ``triggers.csv``; "" without both scopes scored.
    """
    if "scope" not in pooled.columns or "peirce_skill" not in pooled.columns:
        return ""
    by = {str(r["scope"]): r for _, r in pooled.iterrows()}
    if not {"uniform", "local"} <= set(by):
        return ""
    u, loc = by["uniform"], by["local"]
    text = (f"Replayed on the whole record, local thresholds score {fmt_num(loc['peirce_skill'])} "
            f"against {fmt_num(u['peirce_skill'])} for one uniform threshold")
    if "cv_peirce_skill" in pooled.columns and pd.notna(loc.get("cv_peirce_skill")):
        text += (f"; on years held out of the tuning, {fmt_num(loc['cv_peirce_skill'])} against "
                 f"{fmt_num(u.get('cv_peirce_skill'))}")
    return text + ". Tuned thresholds always look better on the years they were tuned on."

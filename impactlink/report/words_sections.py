"""Fixed words of the report's sections: the paragraph that opens each section.

Plain text (the HTML layer escapes it); sentences built from a run's numbers are in
:mod:`impactlink.report.text` and the ``words_*`` modules of each stage.
"""

ANSWERS_NOTE = (
    "Each card below gives, for one impact, the index, time scale and lag that predicted it"
    " best out of sample, how much better than the baselines, and how sure we can be."
)

AUDIT_INTRO = (
    "Does each stage of a threshold ladder occur as often as its definition implies? A "
    "ratio of observed to expected share of weeks above 1 means the stage is reached more "
    "often than intended. The local threshold is the index value that would give the "
    "expected share in that county. Drift compares an early and a late period."
)

CONTRAST_INTRO = (
    "Why did some counties suffer more than others at similar index values? County traits "
    "are added to the index model; an odds ratio above 1 means more impacts than the index "
    "alone predicts where the trait is higher. These are associations between county "
    "characteristics and recorded impacts, not effects."
)

CURVES_INTRO = (
    "How the chance of each impact level rises as the best index gets drier. Shaded bands "
    "are intervals; crosses mark where a curve passes a chance of 10, 25 or 50 %."
)

SKILL_INTRO = (
    "Out-of-sample skill of every candidate, scored on years left out of the fit. Darker "
    "cells are better; hatched cells are no better than the climatological base rate; a dot"
    " marks candidates statistically as good as the best, and the framed cell is the best."
)

PERSISTENCE_INTRO = (
    "Where an impact tends to continue once it has started, simply assuming it continues "
    "(persistence) is a strong baseline. These charts compare the index alone, persistence "
    "alone, and both together."
)

RELIABILITY_INTRO = (
    "Do stated chances come true as often as they say? Points on the dashed diagonal are "
    "reliable; points below it mean the model over-warns, above it under-warns. Bars show "
    "how many forecasts fell in each bin."
)

MAPS_INTRO = (
    "Per county: which candidate predicted best, how well, and how many events that "
    "estimate rests on. Few events mean a fragile estimate."
)

#: Short form of the cautions for the banner on the first screen: (heading, sentence).
CAUTIONS_SHORT = (
    ("Association, not cause", "the numbers show what tends to go together, not what causes what."),
    ("Data limits", "coverage, reporting effort, short records and few events make every "
     "estimate uncertain."),
    ("Decisions", "rest with the responsible authorities, local codes and licensed practice."),
)

#: The cautions every report carries, in full: (heading, text).
CAUTIONS = (
    (
        "Association, not cause",
        "These results describe statistical association between index values and recorded "
        "impacts. They do not show that dryness caused any impact, nor that acting on an "
        "index will prevent one.",
    ),
    (
        "Limits of the data",
        "Impact records are only as complete as their coverage and the effort spent "
        "reporting them. Short records and few events make every estimate uncertain; "
        "weeks outside a source's coverage are unknown, not impact-free. Intervals shown "
        "are the honest range, not decoration.",
    ),
    (
        "Decisions belong to the responsible authorities",
        "Declarations, restrictions and relief decisions rest with the responsible "
        "authorities, under local codes and licensed professional practice. This report is "
        "one input to their judgement, not a substitute for it.",
    ),
)

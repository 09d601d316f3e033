"""Words of the methods section: one paragraph per stage, and the references cited."""

REFERENCES = (
    "Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration: "
    "guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56. "
    "FAO, Rome.",
    "Beguería, S., Vicente-Serrano, S. M., Reig, F. and Latorre, B. (2014). Standardized "
    "precipitation evapotranspiration index (SPEI) revisited: parameter fitting, "
    "evapotranspiration models, tools, datasets and drought monitoring. International "
    "Journal of Climatology, 34(10), 3001\u20133023. doi:10.1002/joc.3887",
    "Brier, G. W. (1950). Verification of forecasts expressed in terms of probability. "
    "Monthly Weather Review, 78(1), 1\u20133. doi:10.1175/1520-0493(1950)078<0001:VOFEIT>2.0.CO;2",
    "Efron, B. and Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & Hall, "
    "New York.",
    "Epstein, E. S. (1969). A scoring system for probability forecasts of ranked categories. "
    "Journal of Applied Meteorology, 8(6), 985\u2013987.",
    "Gringorten, I. I. (1963). A plotting rule for extreme probability paper. Journal of "
    "Geophysical Research, 68(3), 813\u2013814.",
    "Hargreaves, G. H. and Samani, Z. A. (1985). Reference crop evapotranspiration from "
    "temperature. Applied Engineering in Agriculture, 1(2), 96\u201399.",
    "Hobbins, M. T., Wood, A., McEvoy, D. J., Huntington, J. L., Morton, C., Anderson, M. and "
    "Hain, C. (2016). The Evaporative Demand Drought Index. Part I: Linking drought evolution "
    "to variations in evaporative demand. Journal of Hydrometeorology, 17(6), 1745\u20131761. "
    "doi:10.1175/JHM-D-15-0121.1",
    "Hosking, J. R. M. (1990). L-moments: analysis and estimation of distributions using "
    "linear combinations of order statistics. Journal of the Royal Statistical Society B, "
    "52(1), 105\u2013124.",
    "Künsch, H. R. (1989). The jackknife and the bootstrap for general stationary "
    "observations. The Annals of Statistics, 17(3), 1217\u20131241.",
    "McCullagh, P. (1980). Regression models for ordinal data. Journal of the Royal "
    "Statistical Society B, 42(2), 109\u2013142.",
    "McKee, T. B., Doesken, N. J. and Kleist, J. (1993). The relationship of drought "
    "frequency and duration to time scales. Proceedings of the 8th Conference on Applied "
    "Climatology, American Meteorological Society, Boston, 179\u2013184.",
    "Murphy, A. H. (1973). A new vector partition of the probability score. Journal of "
    "Applied Meteorology, 12(4), 595\u2013600.",
    "Peirce, C. S. (1884). The numerical measure of the success of predictions. Science, "
    "4(93), 453\u2013454.",
    "Singer, J. D. and Willett, J. B. (1993). It's about time: using discrete-time survival "
    "analysis to study duration and the timing of events. Journal of Educational Statistics, "
    "18(2), 155\u2013195.",
    "Stagge, J. H., Tallaksen, L. M., Gudmundsson, L., Van Loon, A. F. and Stahl, K. (2015). "
    "Candidate distributions for climatological drought indices (SPI and SPEI). "
    "International Journal of Climatology, 35(13), 4027\u20134040. doi:10.1002/joc.4267",
    "Thom, H. C. S. (1958). A note on the gamma distribution. Monthly Weather Review, 86(4), "
    "117\u2013122.",
    "Thornthwaite, C. W. (1948). An approach toward a rational classification of climate. "
    "Geographical Review, 38(1), 55\u201394.",
    "Varma, S. and Simon, R. (2006). Bias in error estimation when using cross-validation for "
    "model selection. BMC Bioinformatics, 7, 91. doi:10.1186/1471-2105-7-91",
    "Vicente-Serrano, S. M., Beguería, S. and López-Moreno, J. I. (2010). A multiscalar "
    "drought index sensitive to global warming: the Standardized Precipitation "
    "Evapotranspiration Index. Journal of Climate, 23(7), 1696\u20131718. "
    "doi:10.1175/2009JCLI2909.1",
    "Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd edition. "
    "Academic Press, Oxford.",
    "World Meteorological Organization (2012). Standardized Precipitation Index User Guide "
    "(M. Svoboda, M. Hayes and D. Wood). WMO-No. 1090, Geneva.",
)

#: (heading, paragraph) per stage, in page order.
METHODS = (
    ("Indices",
     "Climate records are summed into ISO 8601 weeks and accumulated over each time scale; "
     "each week of the year gets its own distribution, fitted over the calibration period. "
     "The standardized precipitation index (SPI; McKee et al. 1993; WMO 2012) maps "
     "accumulated precipitation through a gamma distribution (maximum likelihood started "
     "from Thom 1958, with a share of exact zeros as in Stagge et al. 2015) to the standard "
     "normal scale. The SPEI does the same for precipitation minus potential "
     "evapotranspiration with a log-logistic distribution fitted by probability-weighted "
     "moments (Vicente-Serrano et al. 2010; Beguería et al. 2014), or a GEV fitted by "
     "L-moments (Hosking 1990); potential "
     "evapotranspiration comes from temperature (Hargreaves & Samani 1985, as in FAO-56, "
     "Allen et al. 1998), from Thornthwaite (1948), or from the input. Evaporative demand "
     "(EDDI) is standardized non-parametrically (Hobbins et al. 2016) and stored with the "
     "sign turned so that negative means dry, like the other indices; supplied indicators "
     "use Gringorten (1963) plotting positions. Values are clipped to \u00b13.09."),
    ("Impact models",
     "Yes/no impacts use logistic regression; ranked impact levels use the proportional-odds "
     "model (McCullagh 1980). The onset of restrictions is modelled in discrete time "
     "(Singer & Willett 1993). Sparse counties borrow strength from their region."),
    ("Skill",
     "Every candidate (index, time scale, lag, model) is scored on whole years left out of "
     "the fit. Scores are the Brier score (Brier 1950) and the ranked probability score "
     "(Epstein 1969), expressed as skill against the climatological base rate (Wilks 2011); "
     "reliability follows the decomposition of Murphy (1973). Intervals come from a "
     "bootstrap over whole years (Efron & Tibshirani 1993; Künsch 1989). Because picking "
     "the best of many candidates flatters its score, a selection-aware (nested) estimate is "
     "reported beside the best candidate's own score (Varma & Simon 2006). Candidates whose "
     "difference from the best is within bootstrap noise are listed as statistically as "
     "good. Persistence (the impact state known when the forecast is made) is a baseline "
     "every candidate must beat."),
    ("Threshold audit",
     "For each stage of a threshold ladder, the share of weeks at or below the threshold is "
     "compared with the share its definition implies, per county, with year-block bootstrap "
     "intervals; the local threshold that would give the expected share is the empirical "
     "quantile of the county's own record."),
    ("Trigger plans",
     "A plan switches on after the index has stayed beyond its threshold for the entry "
     "weeks and off after it has stayed clear for the exit weeks. Plans are replayed over "
     "the record and scored by hit rate, false-alarm ratio and the Peirce skill score "
     "(Peirce 1884), with lead times; local thresholds are also scored on years held out "
     "of their tuning."),
    ("County contrasts and outlook",
     "County traits are added to the index model as standardized predictors with "
     "county-clustered standard errors; observed and expected event counts per county are "
     "compared with Poisson intervals. The outlook applies the fitted impact models to the "
     "latest index values at each modelled lag."),
)

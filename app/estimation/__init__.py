"""The estimation stage: data, measure mapping, estimators, checks against the
data, stability and sensitivity. Pure: pandas, numpy, statsmodels, scipy and
linearmodels only; no web, no storage."""

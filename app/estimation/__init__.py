"""The estimation stage: data, measure mapping, estimators, checks against the
data, a verdict on the diagram, and sensitivity. Pure: pandas, numpy, statsmodels, scipy and
linearmodels only; no web, no storage.

Modules
-------
``tables``        read a CSV / Parquet file (pyarrow), refuse what is not a usable table, profile columns
``design``        propose and check the variable -> column mapping; build the numeric design
                  (complete cases, 0/1 coding, indicator columns) and refuse unusable columns
``planning``      identification with unmapped variables latent (the graph engine), the set /
                  instrument / mediators to use, the smallest groups of unmeasured variables
                  that would allow adjustment, the default method
``methods``       the estimators offered, one entry each (label, strategy, needs, fit and point
                  functions, model assumption, sensitivity); read by planning, service, CLI and page
``estimators``    regression (OLS, HC1), standardization (g-formula, bootstrap), weighting and
                  doubly-robust (analytic sandwich), two-stage (linearmodels IV2SLS),
                  front-door (product of coefficients, bootstrap)
``moments``       means and centred cross-products of a design in one chunked pass
``implications``  the diagram's independences tested on the data (Fisher z; likelihood ratio,
                  from the cross-products where linear),
                  Holm or Benjamini-Hochberg correction
``validation``    checks that can contradict the diagram (valid sets agree, control outcomes
                  and exposures, implications alone and together) and one verdict
``samples``       recognise the shipped demo data by digest
``sensitivity``   Cinelli & Hazlett (2020) partial R2, robustness values, a cause k times as strong as a covariate, the room's stated causes;
                  VanderWeele & Ding (2017) E-values
``service``       one call per question (estimate, validate, sensitivity, disputed arrows)
``cli``           ``arrowmoot estimate GRAPH.json DATA.csv [--map v=col ...] [--method NAME]``

Methods (``--method`` / ``"method"``): ``auto`` (default), ``regression``,
``standardization``, ``weighting``, ``doubly-robust``, ``two-stage``, ``front-door``.

References
----------
Cinelli C, Hazlett C (2020). Making sense of sensitivity: extending omitted variable bias. JRSS-B 82(1).
VanderWeele TJ, Ding P (2017). Sensitivity analysis in observational research: introducing the E-value. Ann Intern Med 167(4).
Staiger D, Stock JH (1997). Instrumental variables regression with weak instruments. Econometrica 65(3).
Lunceford JK, Davidian M (2004). Stratification and weighting via the propensity score. Stat Med 23(19).
Austin PC (2009). Balance diagnostics for comparing the distribution of baseline covariates. Stat Med 28(25).
Holm S (1979); Benjamini Y, Hochberg Y (1995); Fisher RA (1924); Fukaya T et al. (2014) CholeskyQR2.
Pearl J (2009). Causality, 2nd ed. (back-door and front-door criteria).
"""

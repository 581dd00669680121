"""Independent maxima of the cross-lagged family (placeholder, filled below)."""


def clpm_ols(*args, **kwargs):
    raise NotImplementedError


def ri_clpm_mle(*args, **kwargs):
    raise NotImplementedError

"""Independent reference methods for checking stopline's finite-difference prices.

Nothing in the pricing core imports this package (``tests/reference/test_isolation.py``
scans every module outside ``reference/`` and the validation harness, and checks at run time
that pricing leaves it unloaded); the validation harness and the tests use it. Every
function takes plain floats (time in years, continuously compounded ``rate`` and
``div_yield``, annualised ``vol``) and raises :class:`~stopline.errors.InputError` for inputs
outside their domain.

Closed forms (:mod:`.closed_form`)
    :func:`bsm`, :func:`bsm_price`, :func:`perpetual_american`
Binomial trees (:mod:`.trees`)
    :func:`crr_price`, :func:`lr_price`, :func:`bbsr_price`, :func:`lr_extrapolated_price`,
    :func:`tree_price_cash_dividends` (spot model), :func:`tree_price_escrowed`
American approximations (:mod:`.approximations`)
    :func:`baw_price`, :func:`bjerksund_stensland_price`
One cash dividend (:mod:`.rgw`)
    :func:`rgw_american_call`
Helper
    :func:`bivariate_normal_cdf`
"""

from __future__ import annotations

from ._normal import bivariate_normal_cdf
from .approximations import ApproximationResult, baw_price, bjerksund_stensland_price
from .closed_form import BSMResult, PerpetualResult, bsm, bsm_price, perpetual_american
from .rgw import RGWResult, rgw_american_call
from .trees import (
    DIVIDEND_TREE_METHODS,
    bbsr_price,
    crr_price,
    lr_extrapolated_price,
    lr_price,
    tree_price_cash_dividends,
    tree_price_escrowed,
)

__all__ = [
    "BSMResult",
    "PerpetualResult",
    "bsm",
    "bsm_price",
    "perpetual_american",
    "crr_price",
    "lr_price",
    "bbsr_price",
    "lr_extrapolated_price",
    "tree_price_cash_dividends",
    "tree_price_escrowed",
    "DIVIDEND_TREE_METHODS",
    "ApproximationResult",
    "baw_price",
    "bjerksund_stensland_price",
    "RGWResult",
    "rgw_american_call",
    "bivariate_normal_cdf",
]

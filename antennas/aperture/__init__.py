"""Radiation from a planar aperture by the equivalence principle, near field included.

The engine behind the open-waveguide model (:class:`OpenWaveguide`) and the horn
(:mod:`keepclear.antennas.horn`), in five parts:

=========================  ============================================================
:mod:`.distribution`       the aperture field E_t, H_t and its equivalent currents J, M
:mod:`.quadrature`         Gauss-Legendre rules, their order from the integrand's
                           analyticity (Bernstein ellipse)
:mod:`.kernel`             the complete dyadic Green's function (near field) and the
                           radiation integral (far field), each in a reference form
                           and a fast form
:mod:`.radiator`           :class:`ApertureRadiator`: normalisation, adaptive rules,
                           mirror folding, far zone
:mod:`.open_waveguide`     :class:`OpenWaveguide`, the open TE10 guide end
=========================  ============================================================

Each module's docstring states its model, its assumptions and its references.
"""

from .distribution import (
    EQUIVALENCES,
    GROUND_PLANE,
    HUYGENS,
    ApertureDistribution,
    FieldFunction,
    equivalent_currents,
    te10_distribution,
    uniform_distribution,
)
from .kernel import (
    BLOCK_PAIRS,
    dyadic_kernel_sums,
    dyadic_moment_sums,
    fields_from_mixed_sums,
    kernel_sums_from_moments,
    moment_matrix,
    radiation_integral_far_field,
    radiation_integral_far_field_fast,
)
from .open_waveguide import (
    OPEN_END_MODELS,
    OpenWaveguide,
    open_waveguide_distribution,
    open_waveguide_gain_variants,
)
from .quadrature import (
    DEFAULT_TOLERANCE,
    DIRECT_TOLERANCE,
    MAX_ORDER,
    bernstein_pole_parameter,
    gauss_legendre,
    gauss_legendre_order,
    gauss_legendre_order_from_pole,
    gauss_legendre_order_lookup,
    hemisphere_rule,
)
from .radiator import (
    FOLD_QUANTUM_M,
    MAX_BUDGET_BYTES,
    METHODS,
    RULE_CACHE_BYTES,
    ApertureRadiator,
)

__all__ = [
    "BLOCK_PAIRS",
    "DEFAULT_TOLERANCE",
    "DIRECT_TOLERANCE",
    "EQUIVALENCES",
    "FOLD_QUANTUM_M",
    "GROUND_PLANE",
    "HUYGENS",
    "MAX_BUDGET_BYTES",
    "MAX_ORDER",
    "METHODS",
    "OPEN_END_MODELS",
    "RULE_CACHE_BYTES",
    "ApertureDistribution",
    "ApertureRadiator",
    "FieldFunction",
    "OpenWaveguide",
    "bernstein_pole_parameter",
    "dyadic_kernel_sums",
    "dyadic_moment_sums",
    "equivalent_currents",
    "fields_from_mixed_sums",
    "gauss_legendre",
    "gauss_legendre_order",
    "gauss_legendre_order_from_pole",
    "gauss_legendre_order_lookup",
    "hemisphere_rule",
    "kernel_sums_from_moments",
    "moment_matrix",
    "open_waveguide_distribution",
    "open_waveguide_gain_variants",
    "radiation_integral_far_field",
    "radiation_integral_far_field_fast",
    "te10_distribution",
    "uniform_distribution",
]

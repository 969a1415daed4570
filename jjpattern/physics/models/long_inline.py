"""Long junction with the in-line feed: current in at one end, out at the other.

Ic(H) is the upper envelope over the static solutions of the sine-Gordon
equation, phi'' = sin(phi) with phi'(0) = h - i/2 and phi'(L) = h + i/2 (lengths in
lambda_J), tabulated by ``scripts/make_long_junction_table.py`` and interpolated
in ``long_junction.py``. ``period_T`` keeps its short-junction meaning, the field
for one flux quantum through L d', so the magnetic thickness follows from it as
for a short junction; ``ic0_A`` is Ic at the centre of the pattern and
``length_over_josephson_depth`` = L / lambda_J is fitted. At L / lambda_J = 0 the
pattern is the sinc.
"""

from . import long_junction as lj
from .rectangular import unit_shape
from .spec import ExtraParameter, PatternModelSpec

FEED = "inline"


def formula(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0,
            length_over_josephson_depth=0.0):
    """``sqrt((Ic0 s(u; L/lambda_J))^2 + floor^2)`` from the sine-Gordon table."""
    return lj.pattern(field_T, ic0_A, period_T, field_offset_T, floor_A,
                      length_over_josephson_depth, FEED)


def node_flux(count, length_over_josephson_depth=0.0):
    """Minima of the pattern (lifted above zero once the vortex modes overlap)."""
    return lj.minima(count, length_over_josephson_depth, FEED)


def gradient(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0,
             length_over_josephson_depth=0.0):
    """Partial derivatives of :func:`formula` by each parameter (the fit's Jacobian)."""
    return lj.gradient(field_T, ic0_A, period_T, field_offset_T, floor_A,
                       length_over_josephson_depth, FEED)


def derive(params):
    """L / lambda_J, Jc W L and the lower critical field (see ``long_junction.derived``)."""
    return lj.derived(params, FEED)


MODEL = PatternModelSpec(
    name="long-inline",
    formula=formula,
    node_flux=node_flux,
    description="long junction, in-line feed: static sine-Gordon Ic(H), L/lambda_J fitted",
    methods_text=("the critical current of a long junction with an in-line feed "
                  "(bias current in at one end and out at the other), the upper envelope "
                  "over the static solutions of the sine-Gordon equation, "
                  "interpolated in a table against Phi/Phi0 and L/lambda_J, with "
                  "L/lambda_J a fitted parameter and Phi = B L d'"),
    references=lj.REFERENCES,
    extra=(ExtraParameter("length_over_josephson_depth", start=1.0, even=True,
                          description="junction length over the Josephson penetration depth",
                          grid=(0.5, 1.5, 2.5, 3.5, 5.0, 6.5, 8.0, 10.0),
                          limit=lj.LENGTH_LIMIT),),
    # The scan slides the pattern at L/lambda_J = 0, the sinc: the same function as the
    # rectangular model's, so that an automatic choice scans once for both.
    unit_shape=unit_shape,
    derive=derive,
    gradient=gradient,
    ic0_meaning="Ic at the centre of the pattern; Jc W L = Ic0 / g(0; L/lambda_J) is derived",
)

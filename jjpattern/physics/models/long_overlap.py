"""Long junction with the overlap feed: bias current injected uniformly along it.

Ic(H) is the upper envelope over the static solutions of the sine-Gordon
equation, phi'' = sin(phi) - i/L with phi'(0) = phi'(L) = h (lengths in lambda_J),
tabulated by ``scripts/make_long_junction_table.py`` and interpolated in
``long_junction.py``. ``period_T`` keeps its short-junction meaning, the field
for one flux quantum through L d', so the magnetic thickness follows from it as
for a short junction; ``ic0_A`` is Ic at the centre of the pattern and
``length_over_josephson_depth`` = L / lambda_J is fitted. At L / lambda_J = 0 the
pattern is the sinc.
"""

from .long_junction import make_model

MODEL = make_model(
    "overlap", name="long-overlap",
    description="long junction, overlap feed: static sine-Gordon Ic(H), L/lambda_J fitted",
    feed_words="an overlap feed (bias current injected uniformly along it)")

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

from .long_junction import make_model

MODEL = make_model(
    "inline", name="long-inline",
    description="long junction, in-line feed: static sine-Gordon Ic(H), L/lambda_J fitted",
    feed_words="an in-line feed (bias current in at one end and out at the other)")

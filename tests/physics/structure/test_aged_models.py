"""Aged stars of solved_stars past the end of their main sequence: refused, or the track's last model on request."""

import numpy as np
import pytest

from radwalk import constants as k
from radwalk.errors import ModelError
from radwalk.physics.opacity import default_kappa
from radwalk.physics.structure.evolution import X_C_END
from radwalk.physics.structure.models import solved_stars


@pytest.mark.slow
def test_an_age_past_the_end_gives_the_last_model_only_when_asked():
    # two 1.5 M_sun tracks, ~10 s of CPU
    # 1.5 M_sun lives ~2-3 Gyr on the main sequence (KWW 2012 ch. 30, from memory); 6 Gyr is well past it.
    args = (np.array([1.5 * k.M_SUN]), 0.70, 0.014, default_kappa)
    (last,) = solved_stars(*args, age=6.0, past_end="last", dXc=0.05)
    assert last.X[0] <= X_C_END  # the track's last step: central hydrogen exhausted
    # the kept past-the-end model does not answer a caller that wants the refusal
    with pytest.raises(ModelError, match="beyond the end of the main sequence of a 1.5 M_sun star"):
        solved_stars(*args, age=6.0, dXc=0.05)
    with pytest.raises(Exception, match="past_end"):
        solved_stars(*args, age=6.0, past_end="extrapolate")

"""`famwise check` names the statistic each contrast uses: F contrasts are tested on their upper tail."""

from types import SimpleNamespace

from famwise.summary import _statistic_words


def _plan(*tests):
    contrasts = [SimpleNamespace(name=f"c{k}", test=test) for k, test in enumerate(tests)]
    inference = SimpleNamespace(statistic="t", tail="two-sided")
    return SimpleNamespace(study=SimpleNamespace(contrasts=contrasts, inference=inference))


def test_t_contrasts_keep_the_configured_statistic_and_tail():
    assert _statistic_words(_plan("paired", "regression")) == "t statistic, two-sided"


def test_only_f_contrasts_are_an_upper_tailed_f():
    assert _statistic_words(_plan("repeated-measures", "between-groups")) == "F statistic, upper tail"


def test_mixed_contrasts_name_the_f_ones():
    words = _statistic_words(_plan("paired", "between-groups"))
    assert words == "t statistic, two-sided (F, upper tail: c1)"

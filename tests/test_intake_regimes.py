"""The regimes file: parsing, reference choice, and every error naming its culprit."""

import pytest

from pipeline.errors import InputError
from pipeline.intake.regimes import read_regimes


def _write(tmp_path, text, name="regimes.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_parse_targets_known_and_reference(tmp_path):
    path = _write(tmp_path, "regime,targets,known,notes\n"
                            "ctrl,,,first plate\n"
                            "kd_A, A ,yes,\n"
                            "combo,A; B;A,,\n"
                            "drug,B,no,\n"
                            "mystery,,no,\n")
    regs = read_regimes(path, variables=["A", "B", "C"])
    assert [r.name for r in regs] == ["ctrl", "kd_A", "combo", "drug", "mystery"]
    assert regs[2].targets == ("A", "B")
    assert [r.known for r in regs] == [True, True, True, False, False]
    # a known=no regime with empty targets is an unknown intervention, not a control
    assert [r.reference for r in regs] == [True, False, False, False, False]


def test_all_empty_target_regimes_form_the_reference(tmp_path):
    path = _write(tmp_path, "regime,targets\nc1,\nkd,A\nc2,\n")
    assert [r.reference for r in read_regimes(path)] == [True, False, True]


def test_named_reference_is_the_only_reference(tmp_path):
    path = _write(tmp_path, "regime,targets\nc1,\nkd,A\nc2,\n")
    regs = read_regimes(path, reference="c2")
    assert [r.reference for r in regs] == [False, False, True]
    regs = read_regimes(path, reference="kd")  # a reference with targets is allowed
    assert [r.reference for r in regs] == [False, True, False]


@pytest.mark.parametrize("text, kwargs, culprit", [
    ("", {}, "empty"),
    ("regime,known\nctrl,yes\n", {}, "targets"),
    ("regime,targets,known\nctrl,,maybe\n", {}, "maybe"),
    ("regime,targets\nctrl,\nkd,A\nctrl,\n", {}, "'ctrl' appears again"),
    ("regime,targets\nkd1,A\nkd2,B\n", {}, "--reference"),
    ("regime,targets\nctrl,\nkd,A\n", {"reference": "ctlr"}, "ctrl"),
    ("regime,targets\nctrl,\nkd,Gene1\n", {"variables": ["Gene_1", "Gene2"]}, "Gene1"),
    ("regime,targets\n", {}, "no regime rows"),
    ("regime,targets,targets\nctrl,,\n", {}, "more than once"),
    ("regime,targets\n,A\n", {}, "line 2"),
    ("regime,targets,known\nctrl,,\ndrug,A,no\n", {"reference": "drug"}, "known=no"),
])
def test_errors_name_the_culprit(tmp_path, text, kwargs, culprit):
    path = _write(tmp_path, text)
    with pytest.raises(InputError, match="regime|reference") as info:
        read_regimes(path, **kwargs)
    assert culprit in str(info.value)


def test_unknown_target_names_regime_and_nearest(tmp_path):
    path = _write(tmp_path, "regime,targets\nctrl,\nkd,Gene1\n")
    with pytest.raises(InputError) as info:
        read_regimes(path, variables=["Gene_1", "Gene2"])
    msg = str(info.value)
    assert "'Gene1'" in msg and "'kd'" in msg and "nearest" in msg and "Gene_1" in msg


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_regimes(tmp_path / "nope.csv")

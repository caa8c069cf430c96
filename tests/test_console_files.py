"""Console and files: outputs follow the user's umask, a misspelt optional field gets a
"did you mean", a currency sign in an amount gets one plain sentence, and an IRR with no
meaning reads "n/a" with its reason."""
import os
import stat

import pytest

from tco.errors import InputError
from tco.report import formatting as fm
from tco.report.atomic import write_bytes_atomic, write_text_atomic


@pytest.mark.parametrize("mask, mode", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_written_files_follow_the_umask(tmp_path, mask, mode):
    # POSIX: a new file gets 0666 & ~umask (open(2) with mode 0666, as shells create files)
    old = os.umask(mask)
    try:
        write_text_atomic(tmp_path / "a.toml", "x = 1\n")
        write_bytes_atomic(tmp_path / "b.bin", b"\0")
    finally:
        os.umask(old)
    for name in ("a.toml", "b.bin"):
        assert stat.S_IMODE((tmp_path / name).stat().st_mode) == mode


def _demo_dict():
    import tomllib

    from tco.resources import demo_path

    return tomllib.loads(demo_path().read_text(encoding="utf-8"))


def test_misspelt_optional_field_gets_did_you_mean():
    from tco.scenario import parse_scenario

    data = _demo_dict()
    costs = data["trucks"][0]["costs"]
    costs["tols"] = costs.pop("tolls")  # tolls has a default: nothing is "missing"
    with pytest.raises(InputError, match=r"tols.*unknown field \(did you mean 'tolls'\?\)"):
        parse_scenario(data)


def test_currency_sign_in_an_amount_gets_one_sentence():
    from tco.scenario import parse_scenario

    data = _demo_dict()
    data["trucks"][0]["costs"]["purchase_price"] = "$120000"
    with pytest.raises(InputError) as info:
        parse_scenario(data)
    text = str(info.value)
    assert "'$120000' has a currency sign: write amounts as plain numbers" in text
    assert "\n" not in text and "Input should be" not in text


def test_irr_without_meaning_reads_na_with_a_reason():
    # an extra investment never paid back: a negative rate is not shown as a figure
    assert fm.irr_text(-0.608, None, None, check_payback=True) \
        == "n/a (the savings never recover the extra cost)"
    assert fm.irr_text(0.125, None, 6, check_payback=True) == "12.5 %"
    assert fm.irr_text(None, "several sign changes: 3.10%, 41.00%") \
        == "n/a (several sign changes: 3.10%, 41.00%)"

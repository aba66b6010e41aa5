"""Tolerance profiles and TOML profile files."""

from __future__ import annotations

import pytest

from surfcheck.errors import InputError
from surfcheck.grading.tolerances import GENERAL, PROFILES, SCAN, STYLING, load_profile


def test_named_profiles_state_their_origin_and_order():
    assert set(PROFILES) == {"styling", "general", "scan"}
    for p in PROFILES.values():
        assert p.origin and p.coverage == 2.0  # k = 2 for about 95 % (JCGM 100:2008, GUM 6.3)
    # styling is the strictest, scan the most lenient, order by order (common practice, from memory)
    for name in ("g0_gap", "g1_angle", "g2_abs", "g3_abs"):
        assert getattr(STYLING, name) < getattr(GENERAL, name) < getattr(SCAN, name)


def test_load_by_name():
    assert load_profile("scan") is SCAN


def test_toml_file_with_all_keys(tmp_path):
    path = tmp_path / "mine.toml"
    path.write_text('g0_gap = 0.02\ng1_angle = 0.3\ng2_abs = 0.004\ng2_rel = 0.05\n'
                    'g3_abs = 0.02\ng3_rel = 0.2\ncoverage = 3\n')
    p = load_profile(path)
    assert p.name == "mine" and p.g1_angle == 0.3 and p.coverage == 3.0


def test_toml_file_with_a_base(tmp_path):
    path = tmp_path / "loose.toml"
    path.write_text('base = "general"\ng1_angle = 1.5\n')
    p = load_profile(str(path))
    assert p.g1_angle == 1.5 and p.g0_gap == GENERAL.g0_gap and p.name == "loose"


@pytest.mark.parametrize("text, words", [
    ("g0_gap = 0.01\ncolour = 3\n", "unknown key"),
    ('base = "general"\ng1_angle = "wide"\n', "must be a number"),
    ('base = "general"\ng0_gap = -1\n', "must be positive"),
    ('base = "general"\ng2_rel = 5\n', "below 1"),
    ("g0_gap = 0.01\n", "missing"),
    ("g0_gap = = 1\n", "not valid TOML"),
])
def test_bad_files_give_one_line_errors(tmp_path, text, words):
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(InputError) as err:
        load_profile(path)
    assert words in str(err.value) and "\n" not in str(err.value)


def test_unknown_name_and_missing_file():
    with pytest.raises(InputError, match="unknown tolerance profile"):
        load_profile("strict")
    with pytest.raises(InputError, match="not found"):
        load_profile("/nonexistent/x.toml")


def test_units_conversion():
    # 1 in = 25.4 mm exactly (international inch, 1959)
    p = GENERAL.in_units("in")
    assert p.g0_gap == pytest.approx(GENERAL.g0_gap / 25.4)
    assert p.g2_abs == pytest.approx(GENERAL.g2_abs * 25.4)
    assert p.g3_abs == pytest.approx(GENERAL.g3_abs * 25.4**2)
    assert p.g1_angle == GENERAL.g1_angle
    with pytest.raises(InputError):
        GENERAL.in_units("furlong")

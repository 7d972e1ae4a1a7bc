"""One settings schema: ``monitor.config.OPTIONS`` is the only source of every setting's name,
default, bounds and help; the typed sections the library reads are built from it.

Plumbing tests (no check values from outside the project)."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from monitor import config as C
from monitor.measures import MeasureSettings
from monitor.measures.swing import REFERENCES
from monitor.measures.ttest import VARIANTS


def test_every_section_but_the_parties_has_a_typed_form_with_exactly_its_options():
    # the parties and the whole-section tables (such as [states]: code = name) have no typed form
    sections = {opt.section for opt in C.OPTIONS if not opt.section.startswith("parties.") and opt.key}
    assert set(C.SECTION_TYPES) == sections
    for name, cls in C.SECTION_TYPES.items():
        fields = {f.name: f.default if f.default is not dataclasses.MISSING else f.default_factory()
                  for f in dataclasses.fields(cls)}
        assert fields == {opt.key: opt.default for opt in C.section_options(name)}, name


def test_the_engine_settings_are_the_measures_section():
    assert MeasureSettings is C.MeasureSettings
    config = C.load_config(None)
    assert config.measures == MeasureSettings()
    assert config.measures.interval_draws == config["measures.interval_draws"]


def test_a_bound_is_the_same_in_levelfield_toml_and_in_code(tmp_path: Path):
    # the two schemas of old disagreed here (1,000,000 vs 10,000,000 draws)
    with pytest.raises(C.SettingsError, match="interval_draws must be at most 1000000"):
        MeasureSettings(interval_draws=1_000_001)
    path = tmp_path / "levelfield.toml"
    path.write_text("[measures]\ninterval_draws = 1000001\n", encoding="utf-8")
    with pytest.raises(C.ConfigError, match="measures.interval_draws must be at most 1000000"):
        C.load_config(path)
    path.write_text("[measures]\ninterval_draws = 0\nmin_districts = 3\nswing_reference = \"district_mean\"\n",
                    encoding="utf-8")
    got = C.load_config(path).measures
    assert (got.interval_draws, got.min_districts, got.swing_reference) == (0, 3, "district_mean")


def test_choices_match_what_the_engine_accepts():
    def choices(name):
        check = next(o for o in C.OPTIONS if o.name == name).check
        assert check("not-a-choice") is not None
        return tuple(v for v in ("welch", "pooled", "vote_weighted", "district_mean") if check(v) is None)

    assert choices("measures.lopsided_variant") == VARIANTS
    assert choices("measures.swing_reference") == REFERENCES


def test_a_float_setting_given_as_an_integer_is_stored_as_a_float():
    assert MeasureSettings(symmetry_band=0).symmetry_band == 0.0
    assert isinstance(MeasureSettings(symmetry_band=0).symmetry_band, float)


def test_the_default_file_lists_every_option():
    text = C.default_toml()
    for opt in C.OPTIONS:
        # a table option (no value by default) shows its keys as commented examples
        shown = f"\n# {opt.example[0]}" if opt.example else f"\n{opt.key} = "
        assert shown in text, opt.name


def test_state_names_table(tmp_path: Path):
    path = tmp_path / "levelfield.toml"
    path.write_text('[states]\nqv = "Quillan Vale"\nRT = " Rostmark "\n', encoding="utf-8")
    assert C.load_config(path).state_names() == {"QV": "Quillan Vale", "RT": "Rostmark"}
    assert C.load_config(None).state_names() == {}
    for text, message in [('[states]\nQV = ""\n', "name must be a non-empty string"),
                          ('[states]\nQV = "A"\nqv = "B"\n', "the same state code"),
                          ('[states]\nQV = 3\n', "name must be a non-empty string"),
                          ('states = "QV"\n', "must be a table of state code")]:
        path.write_text(text, encoding="utf-8")
        with pytest.raises(C.ConfigError, match=message):
            C.load_config(path)

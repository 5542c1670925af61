"""The page's source forms are mapped from the contract's source models, not retyped."""

from __future__ import annotations

from typing import get_args

import pytest

from service.contract.filters import FilterFamily
from service.contract.sources import SOURCE_MODELS
from service.web import forms


class TestSourceForms:
    def test_basic(self) -> None:
        for kind, _, fields in forms.SOURCE_FORMS:
            model = SOURCE_MODELS[kind]
            for f in fields:
                if f.name == "speed":
                    assert "speed_rpm" in model.model_fields
                else:
                    assert f.name in model.model_fields, (kind, f.name)

    def test_edges(self) -> None:
        # The box kind follows the model: a count of teeth is whole, line harmonics may
        # be a list, a diameter is any number.
        assert forms._field("gear_mesh", "teeth", "Teeth").kind == "int"
        assert forms._field("line", "harmonics", "Harmonics").kind == "list"
        assert forms._field("bearing", "pitch_diameter", "Pitch").kind == "number"

    def test_errors(self) -> None:
        with pytest.raises(KeyError):
            forms._field("gear_mesh", "cogs", "Cogs")


class TestFilterFamilies:
    def test_basic(self) -> None:
        # The page offers exactly the contract's filter families (plus "no filter").
        offered = {name for name, _ in forms.FILTER_FAMILIES}
        assert offered == {"", *get_args(FilterFamily)}

"""Methods are written as their standards are cited (the publishers' designation styles, as
printed on the standards themselves: BSI "BS 1377-7:1990", ASTM "D3080/D3080M-23")."""

from __future__ import annotations

import pytest

from testing.models import DirectShearTest, MethodProfile
from testing.models.direct_shear import DEFAULT_EDITIONS, method_title


@pytest.mark.parametrize(
    ("method", "cited"),
    [
        (MethodProfile.BS_1377_7, "BS 1377-7:1990"),
        (MethodProfile.ISO_17892_10, "BS EN ISO 17892-10:2018"),
        (MethodProfile.ASTM_D3080, "ASTM D3080/D3080M-23"),
        (MethodProfile.AASHTO_T236, "AASHTO T 236"),
    ],
)
def test_each_method_with_its_default_edition_reads_as_cited(
    method: MethodProfile, cited: str
) -> None:
    test = DirectShearTest(method=method, method_edition=DEFAULT_EDITIONS[method])
    assert test.method_title == cited


def test_an_edition_typed_by_the_lab_is_kept_and_a_blank_one_left_out() -> None:
    assert method_title("BS 1377-7", "1990+A1:2013") == "BS 1377-7:1990+A1:2013"
    assert method_title("ASTM D3080/D3080M", "D3080/D3080M-11") == "ASTM D3080/D3080M-11"
    assert method_title("BS 1377-7", "  ") == "BS 1377-7"

"""Numbers with their uncertainty, as every summary shows them."""

from __future__ import annotations

import pytest

from kinfit.core.formatting import format_value


@pytest.mark.parametrize("value, se, text", [
    (1.4887e-4, 6.11e-6, "1.489e-04 ± 6.1e-06"),
    (1.00374, 0.00567, "1.0037 ± 0.0057"),
    (213.809, 12.35, "214 ± 12"),
    (0.54724, 0.10456, "0.55 ± 0.10"),
    (2.5, None, "2.5"),
])
def test_format_value(value, se, text):
    assert format_value(value, se) == text

"""The problem's name: a control character in it is reported like any other bad text (file, line, what to do).

Regression: a local variable in the loader shadowed the helper that shows the offending text, so a
bad name raised TypeError / UnboundLocalError instead of the InputError listing every problem.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from selector.errors import InputError
from selector.io.problem import load_problem

VALID = Path(__file__).parent / "data" / "valid"


@pytest.mark.parametrize("unknown_key", [False, True])
def test_name_with_control_character_is_an_input_error(tmp_path, unknown_key):
    text = (VALID / "problem.toml").read_text(encoding="utf-8")
    extra = 'colour = "red"\n' if unknown_key else ""
    path = tmp_path / "problem.toml"
    named = text.replace('name = "Campus shuttle test case (illustrative data)"', 'name = "van\\u0007"\n' + extra)
    assert named != text
    path.write_text(named, encoding="utf-8")
    for kind in ("motors", "reducers", "tyres"):
        (tmp_path / f"{kind}.csv").write_text((VALID / f"{kind}.csv").read_text(encoding="utf-8"), encoding="utf-8")
    with pytest.raises(InputError) as exc:
        load_problem(path)
    msg = str(exc.value)
    assert 'line 2 name = "van\\x07" contains the control character U+0007 at position 4' in msg
    assert msg.endswith("Fix the text in the file.") or "Fix the text in the file.\n" in msg
    assert ("unknown key colour" in msg) is unknown_key

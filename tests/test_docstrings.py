"""numpydoc's own validator (numpydoc.validate.validate) on every public name: each name of
fillstress.__all__ (the API that docs/api.md documents) and every public method and
property of the public classes.

Checked, because a reader of the reference needs them and they can be wrong:
GL08 a docstring exists; SS01 it has a summary; PR01/PR02 every parameter is documented and
none that does not exist; PR03 in signature order; PR04/PR07 each with a type and a
description; RT01/RT03 a Returns section with a description; EX01 an Examples section
(DEVELOPERS.md: every public docstring has a runnable example; the doctests run them).
For methods and properties the same except EX01 (the class's example shows them in use).

Not checked, as matters of style a reviewer would not hold up a release for: SA01 (See
Also), ES01 (extended summary), SS05/SS06 (imperative mood, one-line summary), PR08/PR09
(capital letter, final full stop), GL02 (closing quotes) and RT02 (type alone on the
Returns line).
"""
import inspect

import numpydoc.validate as numpydoc_validate

import fillstress

CHECKED = {"GL08", "SS01", "PR01", "PR02", "PR03", "PR04", "PR07", "RT01", "RT03", "EX01"}
CHECKED_MEMBERS = CHECKED - {"EX01"}


def _public_names():
    for name in fillstress.__all__:
        if name == "__version__":
            continue
        obj = getattr(fillstress, name)
        path = f"{obj.__module__}.{obj.__qualname__}"
        yield path, CHECKED
        if inspect.isclass(obj):
            for member, value in vars(obj).items():
                if not member.startswith("_") and (callable(value) or isinstance(
                        value, (property, classmethod, staticmethod))):
                    yield f"{path}.{member}", CHECKED_MEMBERS


def _problems(path, codes):
    result = numpydoc_validate.validate(path)
    return [f"{path}: {code} {message}" for code, message in result["errors"]
            if code in codes]


def test_every_public_docstring_passes_numpydoc_validation():
    problems = [p for path, codes in _public_names() for p in _problems(path, codes)]
    assert problems == [], "\n" + "\n".join(problems)


def test_the_check_sees_a_missing_section():
    def undocumented(alpha, beta):
        """Add two numbers."""
        return alpha + beta

    undocumented.__module__ = __name__
    globals()["undocumented"] = undocumented
    codes = {code for code, _ in numpydoc_validate.validate(
        f"{__name__}.undocumented")["errors"]} & CHECKED
    assert {"PR01", "RT01", "EX01"} <= codes

"""Every Examples section in cubeloupe.analysis runs and shows what it says.

The examples are the first code a user copies; they run on the bundled demo
cubes (numpydoc convention, as in scikit-image and astropy).
"""

import doctest
import importlib
import pkgutil

import pytest

import cubeloupe.analysis as analysis

MODULES = sorted(
    name
    # subpackages too (the delivery check, the commands)
    for _, name, _ in pkgutil.walk_packages(analysis.__path__, prefix="cubeloupe.analysis.")
    if not name.rsplit(".", 1)[-1].startswith("__")
)


@pytest.mark.parametrize("module_name", MODULES)
def test_docstring_examples_run(module_name):
    module = importlib.import_module(module_name)
    finder = doctest.DocTestFinder(exclude_empty=True)
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    # The module's own names first, then the public API and the usual imports.
    extra = {"u": importlib.import_module("astropy.units"), "np": importlib.import_module("numpy")}
    extra.update({name: getattr(analysis, name) for name in analysis.__all__})
    extra.update(vars(module))
    for test in finder.find(module, module_name, extraglobs=extra):
        runner.run(test)
    result = runner.summarize(verbose=False)
    assert result.failed == 0, f"{result.failed} docstring example(s) failed in {module_name}"

"""The demo cubes bundled with cubeloupe, and what was injected into them.

The cubes are synthetic: an invented scenario (the Quillwort survey) with
invented sources, made by ``demo_cubes/make_demo_cubes.py``. Each cube has a
sidecar JSON file recording every injected value (line centres, widths,
fluxes, noise, redshift, beams, model parameters); `demo_truth` reads it with
the values as astropy Quantities, so results can be checked against it.

Examples
--------
>>> from cubeloupe.analysis import demo_names, demo_path, demo_truth, open_cube
>>> "disk" in demo_names()
True
>>> cube = open_cube(demo_path("disk"))
>>> demo_truth("disk")["lines"][0]["species"]
'CO'
"""

import json
from importlib import resources
from pathlib import Path

import astropy.units as u

from .errors import CubeFileError

__all__ = ["DEMO_CUBES", "demo_names", "demo_path", "demo_truth"]

# Name -> one-line description; the files are <name>.fits and <name>.json in cubeloupe.demo_cubes.
DEMO_CUBES = {
    "disk": "Quillwort-D7: nearby rotating disk galaxy in CO(2-1); Jy/beam, frequency axis, one beam",
    "lensed_spw1": "Quillwort-L1: lensed dusty galaxy at z~2.7, window 1: CO(7-6) and [CI] 2-1, sloping continuum",
    "lensed_spw2": "Quillwort-L1: window 2 (wider channels, another pixel grid): ortho- and para-H2O",
    "lensed_spw3": "Quillwort-L1: window 3: ortho-H2O 1_10-1_01 and CO(5-4)",
    "lensed_spw4": "Quillwort-L1: window 4: para-H2O 2_02-1_11",
    "lensed_spw5": "Quillwort-L1: window 5: CO(9-8)",
    "lensed_spw6": "Quillwort-L1: window 6: para-H2O 2_11-2_02",
    "lensed_spw7": "Quillwort-L1: window 7 (small): ortho-H2O 3_21-3_12",
    "lensed_spw8": "Quillwort-L1: window 8 (small, low frequency): CO(4-3)",
    "single_dish": "Quillwort-C4: molecular cloud in CO(1-0); K, velocity axis, degenerate Stokes axis (4-D)",
    "varying_beams": "Quillwort-N2: galaxy nucleus in CO(3-2); one beam per channel, blanked edge channels",
}

_PACKAGE = "cubeloupe.demo_cubes"


def demo_names():
    """The names of the bundled demo cubes.

    Returns
    -------
    names : list of str

    Examples
    --------
    >>> demo_names()  # doctest: +NORMALIZE_WHITESPACE
    ['disk', 'lensed_spw1', 'lensed_spw2', 'lensed_spw3', 'lensed_spw4', 'lensed_spw5', 'lensed_spw6',
     'lensed_spw7', 'lensed_spw8', 'single_dish', 'varying_beams']
    """
    return list(DEMO_CUBES)


def _demo_file(name, suffix):
    if name not in DEMO_CUBES:
        listing = "\n".join(f"  {key}: {text}" for key, text in DEMO_CUBES.items())
        raise CubeFileError(f"there is no demo cube named {name!r}; choose one of:\n{listing}")
    path = Path(str(resources.files(_PACKAGE) / f"{name}{suffix}"))
    if not path.is_file():
        raise CubeFileError(
            f"the demo file {path} is missing from the installation; reinstall cubeloupe, or in a "
            "source checkout run `python demo_cubes/make_demo_cubes.py` to make the demo cubes"
        )
    return path


def demo_path(name):
    """Path of a bundled demo cube (a FITS file; open it with `open_cube`).

    The installed files are shared: open them read-only (`open_cube` does) and
    never write to them. ``cubeloupe demo`` copies them into a working folder.

    Parameters
    ----------
    name : str
        One of `demo_names`.

    Returns
    -------
    path : pathlib.Path

    Raises
    ------
    CubeFileError
        Unknown name (the message lists the names), or the file is missing.

    Examples
    --------
    >>> demo_path("disk").name
    'disk.fits'
    """
    return _demo_file(name, ".fits")


def _with_quantities(node):
    """Turn every ``{"value": ..., "unit": ...}`` mapping of a sidecar into a Quantity."""
    if isinstance(node, dict):
        if set(node) == {"value", "unit"}:
            return u.Quantity(node["value"], u.Unit(node["unit"]))
        return {key: _with_quantities(value) for key, value in node.items()}
    if isinstance(node, list):
        return [_with_quantities(value) for value in node]
    return node


def demo_truth(name):
    """Everything injected into a demo cube, from its sidecar file.

    Parameters
    ----------
    name : str
        One of `demo_names`.

    Returns
    -------
    truth : dict
        Values with units are astropy Quantities. Keys include ``rms``,
        ``z``, ``beam`` (or ``beams``), ``lines`` (each with its rest and
        observed frequency, velocity, width, flux and peak), ``continuum``
        and the model parameters of the source (``disk``, ``lens``, ...).
        The lensed windows also hold ``lte_model``: the excitation
        temperature, number of molecules, ortho-to-para ratio and
        partition functions their CO and H2O fluxes were made from.

    Raises
    ------
    CubeFileError
        Unknown name, or the sidecar is missing.

    Examples
    --------
    >>> truth = demo_truth("lensed_spw1")
    >>> truth["z"]
    2.67
    >>> [line["species"] for line in truth["lines"]]
    ['CO', '[CI]']
    >>> truth["lte_model"]["species"]["H2O"]["ortho_para_ratio"]
    2.5
    """
    path = _demo_file(name, ".json")
    return _with_quantities(json.loads(path.read_text()))

"""The hostile-input corpus (#14): shared sandbox and helpers.

Every case works in a `Sandbox`: its inputs are written into ``inputs/`` and
hashed when made; its outputs go to ``out/``. After the case, the sandbox
checks that no input changed (SHA-256 before and after) and that ``out/``
holds exactly the files the case said it would leave (so no partial file and
no temporary file is left behind by a refusal or a failed write).
"""

import hashlib
import os
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

from cubefactory import line_cube_data, write_cube

# CO J=2-1 at 230.538 GHz (CDMS catalogue, Mueller et al. 2005): the test factory's
# default rest frequency, so a line at z = 0 lies in the band of its cubes.
CO21 = 230.538e9
SHAPE = (40, 16, 16)
CRPIX3 = SHAPE[0] / 2 + 0.5  # the band is centred on CO J=2-1: about -25 to +25 km/s in 1.3 km/s channels


def _digest(path):
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


class Sandbox:
    """Inputs that must not change and an output folder that must hold only what a case expects."""

    def __init__(self, root):
        self.root = Path(root)
        self.inputs = self.root / "inputs"
        self.out = self.root / "out"
        self.inputs.mkdir()
        self.out.mkdir()
        self._hashes = {}
        self._expected = set()

    def track(self, path):
        """Record ``path`` (an input file) so the case fails if it changes."""
        path = Path(path)
        self._hashes[path] = _digest(path)
        return path

    def cube(self, name="cube.fits", data=None, *, rng=None, **header_kw):
        """A small line cube (``SHAPE``, one line at z = 0, 3 MHz sigma, mid-band) written as an input."""
        if data is None:
            rng = rng or np.random.default_rng(14)
            data = line_cube_data(SHAPE, rng=rng, noise_rms=1e-3, lines=((CO21, 10e-3, 3e6),), crpix3=CRPIX3)
        header_kw.setdefault("crpix3", CRPIX3)
        return self.track(write_cube(self.inputs / name, data, **header_kw))

    def raw(self, name, content):
        """An input file with the given bytes."""
        path = self.inputs / name
        path.write_bytes(content)
        return self.track(path)

    def expect(self, *names):
        """Declare files (relative to ``out/``) the case is meant to leave."""
        self._expected.update(str(name) for name in names)

    def leftovers(self):
        found = set()
        for folder, _, files in os.walk(self.out):
            for name in files:
                found.add(os.path.relpath(os.path.join(folder, name), self.out))
        for folder, subfolders, _ in os.walk(self.out):
            for name in subfolders:
                path = os.path.join(folder, name)
                if not os.listdir(path):
                    found.add(os.path.relpath(path, self.out) + "/")
        for name in os.listdir(self.out):
            if os.path.islink(os.path.join(self.out, name)):
                found.add(name)
        return found - self._expected

    def verify(self):
        changed = [str(path) for path, digest in self._hashes.items()
                   if not path.exists() or _digest(path) != digest]
        assert not changed, f"input files changed: {changed}"
        left = self.leftovers()
        assert not left, f"unexpected files left in the output folder: {sorted(left)}"


@pytest.fixture
def sandbox(tmp_path):
    box = Sandbox(tmp_path)
    yield box
    box.verify()


def run_python(code, *, limits=(), unprivileged=False, cwd=None):
    """Run ``code`` in a fresh interpreter, optionally under resource limits or without file-permission override.

    ``limits``: (resource name, soft value) pairs set with `resource.setrlimit`
    inside the child before ``code`` runs (e.g. ``("RLIMIT_FSIZE", 20000)`` for a
    full disk: writes past 20 kB fail with EFBIG, as the kernel does at the limit).
    ``unprivileged``: when run as root, the child loses the capabilities that let
    root read and write whatever the file modes say (``setpriv``), so a folder of
    mode 0500 or a file of mode 0000 refuses it as it would any user.
    Returns the CompletedProcess (text output).
    """
    prelude = ["import resource"]
    for name, value in limits:
        prelude.append(f"resource.setrlimit(resource.{name}, ({value}, resource.getrlimit(resource.{name})[1]))")
    script = "\n".join(prelude) + "\n" + textwrap.dedent(code)
    command = [sys.executable, "-c", script]
    if unprivileged and os.geteuid() == 0:
        if not shutil.which("setpriv"):
            pytest.skip("running as root without setpriv: cannot make a folder refuse writes")
        command = ["setpriv", "--bounding-set", "-dac_override,-dac_read_search", *command]
    env = dict(os.environ, PYTHONDONTWRITEBYTECODE="1")
    return subprocess.run(command, capture_output=True, text=True, timeout=300, cwd=cwd, env=env)

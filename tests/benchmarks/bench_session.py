"""Cost of sessions and replay on a driven suite (run on demand).

    python tests/benchmarks/bench_session.py

On each demo cube, after the scripted steps of the session tests, prints the median time of:

* ``to_code()`` (what the Code tab does after each change while it is shown), against the baseline of one
  channel change in the same suite (what a user does most);
* ``save_session`` and ``Loupe.from_session``, against the baseline of opening the same cube in a new Loupe
  (``first_view=False``) — a restore is that plus remaking the regions' spectra and the moment maps.
"""

import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from session_steps import CASES, drive  # noqa: E402

from cubeloupe.analysis import demo_path  # noqa: E402
from cubeloupe.widgets import Loupe  # noqa: E402


def median_time(action, repeat=5):
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        action()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main():
    print(f"{'case':14s} {'to_code':>9s} {'channel':>9s} {'ratio':>6s} {'save':>8s} {'restore':>9s} "
          f"{'open':>8s} {'ratio':>6s}")
    for case in CASES:
        loupe = drive(case)
        n = loupe.cube.shape[0]
        channels = iter(range(10 ** 6))
        channel = median_time(lambda: setattr(loupe, "channel", next(channels) % n))
        code = median_time(loupe.to_code)
        with tempfile.TemporaryDirectory() as folder:
            paths = iter(range(100))
            save = median_time(lambda: loupe.save_session(Path(folder) / f"s{next(paths)}.json"))
            path = Path(folder) / "s0.json"
            restore = median_time(lambda: Loupe.from_session(path), repeat=3)
        names = CASES[case]
        opening = median_time(lambda: Loupe([demo_path(n) for n in names], first_view=False), repeat=3)
        print(f"{case:14s} {code * 1e3:7.1f}ms {channel * 1e3:7.1f}ms {code / channel:6.2f} {save * 1e3:6.1f}ms "
              f"{restore * 1e3:7.0f}ms {opening * 1e3:6.0f}ms {restore / opening:6.2f}")


if __name__ == "__main__":
    main()

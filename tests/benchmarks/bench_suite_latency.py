"""How fast the suite answers in the browser: input event to finished drawing, per interaction (issue #20).

Run on demand (not collected by pytest; several minutes on 2 cores)::

    python tests/benchmarks/bench_suite_latency.py                  # every scenario
    python tests/benchmarks/bench_suite_latency.py --scenario demo --repeat 5 --verbose
    # scenarios: demo, 'demo x5', real, big; --verbose prints what changed when (GL draws included)

Before and after a change, under the same load: run it back to back with the kernel importing
an earlier commit, laid out as a package on PYTHONPATH (the kernels inherit it)::

    mkdir -p /tmp/old/cubeloupe && git archive <commit> analysis widgets demo_cubes | tar -x -C /tmp/old/cubeloupe
    PYTHONPATH=/tmp/old python tests/benchmarks/bench_suite_latency.py --scenario big

It starts JupyterLab and headless Chromium with the browser suite's machinery
(tests/browser/conftest.py, lab.py), writes one notebook per scenario and drives the suite
in it with the mouse and keyboard as a user does. Scenarios: the disk demo cube with one
suite, the same with five suites alive in the kernel (the first is driven), each real cube of
``../shared/real-cubes/`` present, and a 1024 x 1024 pixel cube written here.

What is measured, on the page
    A capture listener notes the time stamp of the input event (the click, the mouse
    release ending a drag, the Enter key, the ``change`` of a drop-down). From then on a
    MutationObserver on the suite's element and hooks on WebGL's draw and texture calls of
    the suite's canvases note every change drawn; changes request a frame, one request at a
    time (``requestAnimationFrame`` followed by a task, so after the paint; requested again
    while changes keep coming). An interaction has finished when the kernel is idle and
    nothing changed for ``QUIET_MS``; its time is the frame after the last change minus the
    input event.

Where the time goes
    ``--verbose`` prints, for each interaction, what changed on the page when and what the
    kernel sent when (ms after the input event, model and traits); ``--profile NAME`` the
    page's main-thread work after the input event (a CPU profile by function and a timeline
    trace by kind: scripts, style, layout, paint, GC).

Baseline, same run
    The round trip of a trivial widget message: a button whose click handler in the kernel
    writes a number into a label. Every figure is also printed as a ratio to its median.

Where the time goes
    The kernel is instrumented from the notebook: the time spent handling each widget message
    (``Widget._handle_msg``: the computation and the sending) and, inside it, in
    ``send_state`` (serialising the state and its binary buffers), with the bytes sent. What
    is left of the page's figure is transport and the front end's decoding and drawing.

Playing
    The Play button steps the channel from the browser every ``play_interval`` ms; the figure
    is the interval between images drawn (texture uploads of the sky canvas): it equals the
    play interval when every frame arrives in time.
"""

import argparse
import json
import os
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "browser"))  # the browser suite's machinery
sys.path.insert(0, str(HERE))

from conftest import CHROMIUM_ARGS, REPO, LabServer, find_chromium  # noqa: E402
from lab import LabPage  # noqa: E402

REAL_CUBES = REPO.parent / "shared" / "real-cubes"
QUIET_MS = 600          # nothing drawn for this long, kernel idle: the interaction has finished
TIMEOUT_S = 90          # one interaction's time limit (a moment map on a busy machine)
VERBOSE = False
PROFILE = None          # --profile NAME: the browser's CPU profile of the interactions whose name starts so
VIEWPORT = {"width": 1440, "height": 1000}

# Wraps WebGL before any page script runs: draws and texture uploads of canvases inside the
# watched element count as changes drawn.
GL_HOOK = """
(() => {
  const wrap = (proto) => {
    if (!proto) return;
    for (const name of ['drawArrays', 'drawElements', 'texImage2D', 'texSubImage2D']) {
      const original = proto[name];
      proto[name] = function (...args) {
        const cl = window.__cl;
        if (cl && cl.root && this.canvas && cl.root.contains(this.canvas)) cl.mark(name.startsWith('tex') ? 'tex' : 'gl');
        return original.apply(this, args);
      };
    }
  };
  wrap(window.WebGLRenderingContext && WebGLRenderingContext.prototype);
  wrap(window.WebGL2RenderingContext && WebGL2RenderingContext.prototype);
})();
"""

PAGE_TIMER = """
(rootSelector) => {
  const cl = window.__cl = window.__cl || {};
  cl.root = document.querySelector(rootSelector);
  cl.armed = null; cl.t0 = null; cl.last = null; cl.frame = null; cl.count = 0; cl.seq = 0; cl.tex = []; cl.timeline = [];
  const describe = (node) => {
    let element = node && node.nodeType === 1 ? node : node && node.parentElement;
    const names = [];
    while (element && element !== cl.root && names.length < 4) {
      const own = Array.from(element.classList || []).filter(c => c.startsWith('cubeloupe') || c.startsWith('widget-')
                                                            || ['mark', 'axis', 'tick', 'line', 'dot'].includes(c));
      if (own.length) names.push(own[0]);
      element = element.parentElement;
    }
    return (node && node.nodeName || '?') + ' in ' + names.join('<');
  };
  cl.mark = (kind, node) => {
    if (cl.t0 === null) return;
    const now = performance.now();
    cl.last = now; cl.count += 1;
    if (cl.timeline.length < 400) cl.timeline.push([Math.round(now - cl.t0), kind === 'dom' ? describe(node) : kind]);
    if (kind === 'tex') cl.tex.push(now);
    cl.seq += 1;
    // The frame that shows the changes: their animation frame, then a task after its paint. One request
    // at a time (not one per change: hundreds of them cost the page more than what they measure).
    if (!cl.pending) { cl.pending = true; cl.tick(); }
  };
  cl.tick = () => requestAnimationFrame(() => {
    const seen = cl.seq;
    setTimeout(() => {
      if (seen === cl.seq) { cl.pending = false; cl.frame = performance.now(); } else cl.tick();
    }, 0);
  });
  cl.pending = false;
  cl.arm = (type, key) => { cl.armed = {type, key}; cl.t0 = null; cl.last = null; cl.frame = null;
                            cl.count = 0; cl.tex = []; cl.timeline = []; };
  if (!cl.listening) {
    for (const type of ['click', 'mouseup', 'keydown', 'change']) {
      window.addEventListener(type, (event) => {
        const armed = cl.armed;
        if (armed && cl.t0 === null && armed.type === type && (!armed.key || event.key === armed.key)) {
          cl.t0 = event.timeStamp;
        }
      }, true);
    }
    cl.listening = true;
  }
  if (cl.observer) cl.observer.disconnect();
  cl.observer = new MutationObserver((records) => records.forEach(r => cl.mark('dom', r.target)));
  cl.observer.observe(cl.root, {subtree: true, childList: true, attributes: true, characterData: true});
  return !!cl.root;
}
"""

READ_TIMER = """() => { const cl = window.__cl; return {t0: cl.t0, last: cl.last, frame: cl.frame, count: cl.count,
  now: performance.now(), origin: performance.timeOrigin, tex: cl.tex, timeline: cl.timeline}; }"""

SETUP = """\
import json, time, warnings
import ipywidgets as w
from ipywidgets import Widget
from cubeloupe.analysis import demo_path, demo_truth, open_cube
from cubeloupe.widgets import Loupe

# Where the kernel's time goes: each widget message handled, and the state sent inside it.
_cl_log = []
_cl_handle, _cl_send_state = Widget._handle_msg, Widget.send_state
_cl_depth = [0]
def _cl_timed_handle(self, msg):
    start = time.time(); _cl_depth[0] += 1
    try:
        return _cl_handle(self, msg)
    finally:
        _cl_depth[0] -= 1
        if not _cl_depth[0]:
            _cl_log.append(('handle', start, time.time() - start, 0))
def _cl_timed_send(self, key=None):
    start = time.time()
    try:
        return _cl_send_state(self, key=key)
    finally:
        _cl_log.append(('send', start, time.time() - start, 0))
_cl_raw_send = Widget._send
def _cl_counted(self, msg, buffers=None):
    size = sum(memoryview(b).nbytes for b in (buffers or [])) + len(json.dumps(msg, default=str))
    what = type(self).__name__ + ':' + ','.join(sorted((msg.get('state') or {}))[:3]) if isinstance(msg, dict) else ''
    _cl_log.append(('bytes', time.time(), 0.0, size, what))
    return _cl_raw_send(self, msg, buffers)
Widget._send = _cl_counted
Widget._handle_msg, Widget.send_state = _cl_timed_handle, _cl_timed_send

# The baseline: a trivial round trip (click -> kernel -> label).
probe_button = w.Button(description='probe'); probe_button.add_class('cl-probe-button')
probe_label = w.Label('0'); probe_label.add_class('cl-probe-label')
probe_button.on_click(lambda _: setattr(probe_label, 'value', str(int(probe_label.value) + 1)))
probe = w.HBox([probe_button, probe_label]); probe.add_class('cl-probe')
probe
"""

DEMO_SUITE = """\
truth = demo_truth('disk')
suites = [Loupe(demo_path('disk'), z=truth['z'], rest_frequency=truth['lines'][0]['rest_frequency'],
                velocity_offset=truth['disk']['systemic_velocity']) for _ in range({count})]
display(*suites)
"""

FILE_SUITE = """\
with warnings.catch_warnings():
    warnings.simplefilter('ignore')  # header quirks of real deliveries; not what is measured
    suites = [Loupe({path!r})]
display(*suites)
"""


def _notebook(path, cells):
    import nbformat

    notebook = nbformat.v4.new_notebook()
    notebook.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    notebook.cells = [nbformat.v4.new_code_cell(source) for source in cells]
    nbformat.write(notebook, str(path))


def _big_cube(folder):
    """A 1024 x 1024 pixel, 48-channel float32 cube (200 MB), written chunk by chunk."""
    from _cubes import write_big_cube

    path, _ = write_big_cube(Path(folder) / "big_1024.fits", (48, 1024, 1024))
    return path


class Driver:
    """One scenario's page: measures interactions on the first suite."""

    def __init__(self, lab):
        self.lab = lab
        self.page = lab.page
        self.suite = lab.notebook.locator(".cubeloupe-loupe").first
        self.records = {}     # interaction -> [{'ms':..., 't0':epoch s, 'end':epoch s}, ...]
        self.page.evaluate(PAGE_TIMER, ".jp-NotebookPanel:not(.lm-mod-hidden) .cubeloupe-loupe")

    def watch(self, selector):
        assert self.page.evaluate(PAGE_TIMER, selector), f"nothing matches {selector}"

    def measure(self, name, trigger, act, key=None):
        """Arm the page timer for the input event ``trigger``, call ``act()``, wait until drawn."""
        self.page.evaluate("([type, key]) => window.__cl.arm(type, key)", [trigger, key])
        profiling = PROFILE is not None and name.startswith(PROFILE) and name not in self.records
        if profiling:
            cdp = self.page.context.new_cdp_session(self.page)
            cdp.send("Profiler.enable")
            cdp.send("Profiler.setSamplingInterval", {"interval": 250})
        act()
        if profiling:  # from the input event on (the gesture's own moves left out)
            cdp.send("Profiler.start")
            browser = self.page.context.browser
            browser.start_tracing(page=self.page, categories=["devtools.timeline"])
        deadline = time.monotonic() + TIMEOUT_S
        while True:
            state = self.page.evaluate(READ_TIMER)
            idle = self.lab.state()["status"] == "idle"
            if (state["t0"] is not None and idle and state["now"] - (state["last"] or state["t0"]) > QUIET_MS
                    and (state["last"] is None or (state["frame"] or 0) >= state["last"])):
                break
            if time.monotonic() > deadline:
                print(f"  {name}: no end within {TIMEOUT_S} s (t0 {state['t0']}, changes {state['count']})")
                return None
            time.sleep(0.05)  # polling interval of the condition above
        if profiling:
            print_profile(name, cdp.send("Profiler.stop")["profile"])
            cdp.detach()
            print_trace(json.loads(browser.stop_tracing()))
        if state["last"] is None:
            print(f"  {name}: nothing changed on the page")
            return None
        ms = state["frame"] - state["t0"]
        origin = state["origin"] / 1000
        self.records.setdefault(name, []).append(
            {"ms": ms, "t0": origin + state["t0"] / 1000, "end": origin + state["frame"] / 1000})
        if VERBOSE and len(self.records[name]) == 1:
            steps, previous = [], None
            for at, what in state["timeline"]:
                if what != previous:
                    steps.append(f"{at}:{what}")
                previous = what
            # The WebGL draws and the first and last few changes tell where the time went.
            kept = [step for k, step in enumerate(steps) if k < 6 or k >= len(steps) - 4 or ":tex" in step
                    or ":gl" in step]
            print(f"  {name}: {ms:.0f} ms; changes: {'; '.join(kept)}")
        if VERBOSE:
            # Every run in short: when each kind of change was first and last seen (axis ticks redrawn
            # mean a rescale, which redraws every mark of the figure too).
            kinds = {}
            for at, what in state["timeline"]:
                kind = "axis" if "axis<" in what else what.split(" in ")[-1].split("<")[0] or what
                first, last = kinds.get(kind, (at, at))
                kinds[kind] = (min(first, at), max(last, at))
            print(f"    run {len(self.records[name])}: {ms:.0f} ms: "
                  + ", ".join(f"{k} {a}-{b}" for k, (a, b) in sorted(kinds.items(), key=lambda kv: kv[1])))
        return state

    # --- the gestures -------------------------------------------------------------------------
    def click(self, locator):
        locator.scroll_into_view_if_needed()
        locator.click()

    def drag_fraction(self, area, start, end, steps=10):
        area.scroll_into_view_if_needed()
        box = area.bounding_box()
        point = lambda f: (box["x"] + f[0] * box["width"], box["y"] + f[1] * box["height"])  # noqa: E731
        self.lab.drag(point(start), point(end), steps=steps)

    def visible(self, selector):
        locator = self.suite.locator(selector)
        return locator.count() > 0 and locator.first.is_visible()


def print_profile(name, profile, top=22):
    """The page's main-thread time by function (self time), from a CDP CPU profile of one interaction.

    The profile starts as the gesture ends (just after the input event) and spans the wait until drawn.
    """
    nodes = {node["id"]: node for node in profile["nodes"]}
    spent = {}
    for node_id, delta in zip(profile["samples"], profile["timeDeltas"]):
        frame = nodes[node_id]["callFrame"]
        where = frame["url"].rsplit("/", 1)[-1][:40]
        key = f"{frame['functionName'] or '(anonymous)'} {where}:{frame['lineNumber']}" if where else \
            frame["functionName"]
        spent[key] = spent.get(key, 0) + delta / 1000
    busy = sum(v for k, v in spent.items() if k not in ("(idle)", "(program)"))
    print(f"  {name}: profile, {busy:.0f} ms in scripts of {sum(spent.values()):.0f} ms sampled "
          f"(idle {spent.get('(idle)', 0):.0f}, program {spent.get('(program)', 0):.0f}, "
          f"GC {spent.get('(garbage collector)', 0):.0f})")
    for key, ms in sorted(spent.items(), key=lambda kv: -kv[1])[:top]:
        if key not in ("(idle)", "(program)"):
            print(f"    {ms:6.1f} ms  {key}")


def print_trace(trace, top=12):
    """The renderer's main thread by kind of work (style, layout, paint, scripts...), from a timeline trace.

    Durations of nested events overlap (a layout forced by a script is inside the script's time).
    """
    events = trace["traceEvents"] if isinstance(trace, dict) else trace
    main = {(e["pid"], e["tid"]) for e in events if e.get("name") == "thread_name"
            and e.get("args", {}).get("name") == "CrRendererMain"}
    spent, count = {}, {}
    for e in events:
        if e.get("ph") == "X" and (e["pid"], e["tid"]) in main:
            spent[e["name"]] = spent.get(e["name"], 0) + e.get("dur", 0) / 1000
            count[e["name"]] = count.get(e["name"], 0) + 1
    print("    main thread, by kind: " + "; ".join(f"{k} {v:.0f} ms ({count[k]}x)" for k, v in
                                                 sorted(spent.items(), key=lambda kv: -kv[1])[:top]))


def run_interactions(lab, repeat):
    d = Driver(lab)
    suite = d.suite
    # Each kind of interaction is tried on its own: one that cannot be done on a cube (no line
    # markers on a velocity-only cube...) is reported and the others still run.
    def step_0():
        probe = lab.notebook.locator(".cl-probe-button")
        d.watch(".jp-NotebookPanel:not(.lm-mod-hidden) .cl-probe")
        for _ in range(repeat):
            d.measure("baseline: trivial widget round trip", "click", lambda: d.click(probe))
        d.watch(".jp-NotebookPanel:not(.lm-mod-hidden) .cubeloupe-loupe")

    def step_1():
        forward, back = suite.locator(".cubeloupe-channel-forward"), suite.locator(".cubeloupe-channel-back")
        for i in range(repeat):
            d.measure("channel step", "click", lambda: d.click(forward if i % 2 == 0 else back))

    def step_2():
        # Playing: the interval between images drawn while the Play widget steps the channels.
        play = suite.locator(".cubeloupe-channel-play button").first
        d.page.evaluate("() => window.__cl.arm('click', null)")
        d.click(play)
        time.sleep(4.0)  # let it play this long: the measured quantity
        state = d.page.evaluate(READ_TIMER)
        d.click(suite.locator(".cubeloupe-channel-play button").nth(1))  # pause
        tex = state["tex"]
        intervals = [b - a for a, b in zip(tex, tex[1:]) if b - a > 20]  # one image may take two uploads
        d.records["playing: interval between images drawn (300 ms asked)"] = [{"ms": v, "t0": None, "end": None}
                                                                              for v in intervals]
        lab.wait_for_kernel_idle()

    def step_3():
        sky_area = suite.locator(".cubeloupe-sky-figure .plotarea_events")
        d.click(suite.locator(".cubeloupe-region-tools button", has_text="Box"))
        lab.wait_for_kernel_idle()  # the tool is switched in the kernel before the gesture
        boxes = [((0.3, 0.35), (0.6, 0.65)), ((0.45, 0.4), (0.6, 0.55)), ((0.3, 0.6), (0.45, 0.75))]
        for start, end in boxes[:max(1, min(3, repeat))]:
            d.measure("region drawn -> spectrum", "mouseup", lambda: d.drag_fraction(sky_area, start, end, steps=8))

    def step_4():
        spectrum_area = suite.locator(".cubeloupe-spectrum-figure .plotarea_events")
        d.click(suite.locator(".cubeloupe-spectrum-mode button", has_text="Line-free"))
        lab.wait_for_kernel_idle()  # the tool is switched in the kernel before the gesture
        ranges = [(0.03, 0.12), (0.85, 0.95), (0.13, 0.2), (0.78, 0.84), (0.05, 0.1)]
        for i in range(repeat):
            a, b = ranges[i % len(ranges)]
            d.measure("range drag -> baseline", "mouseup",
                      lambda: d.drag_fraction(spectrum_area, (a, 0.5), (b, 0.5)))
        d.click(suite.locator(".cubeloupe-spectrum-mode button", has_text="Line window"))
        lab.wait_for_kernel_idle()  # the tool is switched in the kernel before the gesture
        d.measure("range drag -> line window", "mouseup",
                  lambda: d.drag_fraction(spectrum_area, (0.35, 0.5), (0.65, 0.5)))

    def step_5():
        if not d.visible(".cubeloupe-z-input input"):
            print("  no z box")
            return
        z_box = suite.locator(".cubeloupe-z-input input")
        z0 = float(z_box.input_value() or 0)
        for i in range(repeat):
            value = f"{z0 + (0.0004 if i % 2 == 0 else 0.0):.6f}"

            def type_z():
                z_box.scroll_into_view_if_needed()
                z_box.fill(value)
                z_box.press("Enter")

            d.measure("z typed -> markers", "keydown", type_z, key="Enter")

    def step_6():
        if not d.visible(".cubeloupe-velocity-slider"):
            print("  no velocity slider")
            return
        slider = suite.locator(".cubeloupe-velocity-slider")
        for i in range(repeat):
            fraction = 0.53 if i % 2 == 0 else 0.47

            def drag_velocity():
                slider.scroll_into_view_if_needed()
                track = slider.locator(".noUi-base").bounding_box()
                handle = slider.locator(".noUi-handle").bounding_box()
                start = (handle["x"] + handle["width"] / 2, handle["y"] + handle["height"] / 2)
                lab.drag(start, (track["x"] + fraction * track["width"], start[1]), steps=10)

            d.measure("velocity slider -> markers", "mouseup", drag_velocity)

    def step_7():
        make = suite.locator(".cubeloupe-moment-button")
        for _ in range(max(1, repeat // 2)):
            d.measure("moment maps computed (button)", "click", lambda: d.click(make))

    def step_8():
        choice = suite.locator(".cubeloupe-source select")
        options = [t.replace("\xa0", " ") for t in choice.locator("option").all_inner_texts()]
        if "moment 0" not in options:
            print(f"  no moment map to show (offered: {options})")
            return
        for i in range(repeat):
            target = ["moment 1", "channel", "moment 0"][i % 3]

            def show():
                choice.scroll_into_view_if_needed()
                choice.select_option(index=options.index(target))

            d.measure("Show -> moment map / channel", "change", show)

    def step_9():
        tabs = suite.locator(".cubeloupe-actions .lm-TabBar-tab, .cubeloupe-actions .p-TabBar-tab")
        export_tab = tabs.filter(has_text="Export")
        if export_tab.count():
            d.click(export_tab.first)
            overwrite = suite.locator(".cubeloupe-actions .widget-checkbox:visible", has_text="Replace")
            if overwrite.count() and not overwrite.first.locator("input").is_checked():
                overwrite.first.locator("input").check()
            lab.wait_for_kernel_idle()
            # Spectra and measurements in turn: the status line then changes at every click.
            buttons = [suite.locator(".cubeloupe-export-spectra"), suite.locator(".cubeloupe-export-measurements")]
            for i in range(max(2, repeat // 2 + 1)):
                d.measure("export spectra / measurements (ECSV)", "click", lambda: d.click(buttons[i % 2]))

    for step in (step_0, step_1, step_2, step_3, step_4, step_5, step_6, step_7, step_8, step_9):
        try:
            step()
        except Exception as error:  # a benchmark reports and goes on
            print(f"  {step.__name__} failed: {type(error).__name__}: {str(error).splitlines()[0]}")
            lab.page.keyboard.press("Escape")
    return d.records


def kernel_split(lab, records):
    """Add each interaction's kernel time (handling, of which sending state) and bytes sent."""
    output = lab.run_code("print(json.dumps(_cl_log)); _cl_log.clear()")
    log = json.loads(output.splitlines()[-1])
    for runs in records.values():
        for run in runs:
            if run["t0"] is None:
                continue
            inside = [e for e in log if run["t0"] - 0.02 <= e[1] <= run["end"]]
            run["kernel_ms"] = 1000 * sum(e[2] for e in inside if e[0] == "handle")
            run["send_ms"] = 1000 * sum(e[2] for e in inside if e[0] == "send")
            run["bytes"] = sum(e[3] for e in inside if e[0] == "bytes")
            # What the kernel sent when, after the input event (--verbose): ms, model class and keys.
            run["sent"] = [(round(1000 * (e[1] - run["t0"])), e[4]) for e in inside if e[0] == "bytes"]
    if VERBOSE:
        for name, runs in records.items():
            for k, run in enumerate(runs):
                sent = run.get("sent")
                if sent:
                    print(f"  {name}, run {k + 1} ({run['ms']:.0f} ms): kernel sent "
                          + "; ".join(f"{at}:{what}" for at, what in sent[:24]))


def scenarios(folder, only):
    found = {"demo": [DEMO_SUITE.format(count=1)], "demo x5": [DEMO_SUITE.format(count=5)]}
    for name in ("co10_ngc4047_carma.fits", "l1448_13co.fits"):
        if (REAL_CUBES / name).exists():
            found[f"real {name.split('_')[0]}"] = [FILE_SUITE.format(path=str((REAL_CUBES / name).resolve()))]
    if not only or "big" in only:
        found["big 1024x1024"] = [FILE_SUITE.format(path=str(_big_cube(folder)))]
    return {k: v for k, v in found.items()
            if not only or k in only or any(o in ("real", "big") and k.startswith(o) for o in only)}


def summary_table(results, load):
    lines = []
    for scenario, records in results.items():
        base = records.get("baseline: trivial widget round trip", [])
        base_ms = statistics.median(r["ms"] for r in base) if base else float("nan")
        lines.append(f"\n== {scenario}   (load average {load[scenario][0]:.2f} before, {load[scenario][1]:.2f} after; "
                     f"baseline median {base_ms:.0f} ms)")
        lines.append(f"{'interaction':52s} {'n':>3s} {'median':>7s} {'worst':>7s} {'/base':>6s} "
                     f"{'kernel':>7s} {'send':>6s} {'kB sent':>8s}")
        for name, runs in records.items():
            ms = [r["ms"] for r in runs]
            if not ms:
                continue
            med = statistics.median(ms)
            kernel = [r.get("kernel_ms") for r in runs if r.get("kernel_ms") is not None]
            send = [r.get("send_ms") for r in runs if r.get("send_ms") is not None]
            size = [r.get("bytes") for r in runs if r.get("bytes") is not None]
            fmt = lambda v, f: format(statistics.median(v), f) if v else "-"  # noqa: E731
            lines.append(f"{name:52s} {len(ms):3d} {med:7.0f} {max(ms):7.0f} {med / base_ms:6.1f} "
                         f"{fmt(kernel, '7.0f'):>7s} {fmt(send, '6.0f'):>6s} "
                         f"{(fmt([s / 1000 for s in size], '8.1f') if size else '-'):>8s}")
    return "\n".join(lines)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5, help="repetitions of each interaction")
    parser.add_argument("--scenario", action="append", default=[],
                        help="demo, 'demo x5', real, big (default all; may be repeated)")
    parser.add_argument("--json", type=Path, help="also write every measurement here")
    parser.add_argument("--verbose", action="store_true", help="print what changed when, for each interaction")
    parser.add_argument("--profile", metavar="NAME", help="print the browser's CPU profile (self time by function) "
                                                          "of the first run of each interaction named NAME...")
    args = parser.parse_args()
    global VERBOSE, PROFILE
    VERBOSE, PROFILE = args.verbose, args.profile
    chromium = find_chromium()
    if chromium is None:
        sys.exit("no Chromium found: install the distribution's 'chromium' package")
    from playwright.sync_api import sync_playwright

    work = Path(tempfile.mkdtemp(prefix="cubeloupe-latency-"))
    root = work / "root"
    root.mkdir()
    shutil.copytree(REPO / "demo_cubes", root / "demo_cubes", ignore=shutil.ignore_patterns("__pycache__"))
    server = LabServer(root, work / "state")
    results, load = {}, {}
    try:
        server.start()
        with sync_playwright() as playwright:
            browser = playwright.chromium.launch(executable_path=chromium, headless=True, args=CHROMIUM_ARGS)
            for index, (name, cells) in enumerate(scenarios(root, args.scenario).items()):
                context = browser.new_context(viewport=VIEWPORT, device_scale_factor=1)
                context.add_init_script(GL_HOOK)
                lab = LabPage(context.new_page(), server.base_url, server.token, work)
                notebook = f"latency_{index}.ipynb"
                _notebook(root / notebook, [SETUP, *cells])
                print(f"{name}: opening {notebook}", flush=True)
                lab.open_notebook(notebook)
                lab.run_all()
                errors = lab.error_outputs()
                if errors:
                    print(f"  notebook errors: {errors[:2]}")
                lab.notebook.locator(".cubeloupe-loupe").first.wait_for()
                lab.wait_for_kernel_idle()
                before = os.getloadavg()[0]
                records = run_interactions(lab, args.repeat)
                after = os.getloadavg()[0]
                kernel_split(lab, records)
                results[name], load[name] = records, (before, after)
                lab.screenshot(f"latency-{index}")
                if lab.console_errors:
                    print(f"  console errors: {lab.console_errors[:3]}")
                context.close()
                _shutdown_kernels(server)
                print(summary_table({name: records}, load), flush=True)
            browser.close()
    finally:
        server.stop()
    print("\n" + "=" * 100)
    print(f"cubeloupe suite latency, input event -> frame after the last change drawn; medians and worst (ms); "
          f"{os.cpu_count()} cores; kernel = time handling widget messages, send = of which serialising and "
          "sending state")
    print(summary_table(results, load))
    if args.json:
        args.json.write_text(json.dumps({"results": results, "load": load}, indent=1))
    shutil.rmtree(work, ignore_errors=True)


def _shutdown_kernels(server):
    """End the scenario's kernel so that the next one starts on a quiet machine."""
    import urllib.request

    headers = {"Authorization": f"token {server.token}"}
    with urllib.request.urlopen(urllib.request.Request(f"{server.base_url}/api/kernels", headers=headers)) as r:
        kernels = json.load(r)
    for kernel in kernels:
        request = urllib.request.Request(f"{server.base_url}/api/kernels/{kernel['id']}", method="DELETE",
                                         headers=headers)
        urllib.request.urlopen(request).close()


if __name__ == "__main__":
    main()

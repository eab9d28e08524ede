"""ExportPanel: the suite's "Export" tab — a file-name start, a replace switch and one button per kind of file.

The files themselves are written by the suite's own export methods
(`Loupe.export_moments`, `export_spectra`, `export_measurements`,
`save_picture`), which call `cubeloupe.analysis` writers; this panel only
collects the name, calls them and reports what was written beside the buttons.
"""

import ipywidgets as w

from .status import StatusLine

__all__ = ["ExportPanel"]


class ExportPanel(w.VBox):
    """Buttons writing the suite's results to files, with the outcome shown under them.

    Parameters
    ----------
    loupe : Loupe
        The suite whose export methods the buttons call.

    Attributes
    ----------
    name : ipywidgets.Text
        Start of the names of the files written (a folder may be included).
    overwrite : ipywidgets.Checkbox
        Allow writing over files of the same name.
    buttons : list of ipywidgets.Button
    status : StatusLine
        What was written, or why not.
    """

    def __init__(self, loupe, **kwargs):
        self.name = w.Text(value="cubeloupe", description="File names start with",
                           tooltip="Start of the names of the files written (a folder may be included); "
                                   "the kind of file and its extension are added",
                           style={"description_width": "initial"}, layout=w.Layout(width="360px"))
        self.overwrite = w.Checkbox(value=False, description="Replace existing files", indent=False,
                                    tooltip="Allow writing over files of the same name")
        self.buttons = []
        for label, icon, tip, action in (
            ("Moment maps (FITS)", "file", "Write the moment maps as FITS images with sky coordinates, beam "
                                           "and units", lambda stem, ow: loupe.export_moments(f"{stem}_moments.fits", ow)),
            ("Spectra (ECSV)", "table", "Write every region's spectrum as a text table",
             lambda stem, ow: loupe.export_spectra(f"{stem}_spectra.ecsv", ow)),
            ("Measurements (ECSV)", "list", "Write the measurement table as a text table",
             lambda stem, ow: loupe.export_measurements(f"{stem}_lines.ecsv", ow)),
            ("Pictures (PNG)", "image", "Draw the sky and spectrum views to PNG files (made in the kernel, "
                                        "no browser needed)",
             lambda stem, ow: [loupe.save_picture("sky", f"{stem}_sky.png", ow),
                               loupe.save_picture("spectrum", f"{stem}_spectrum.png", ow)]),
        ):
            button = w.Button(description=label, icon=icon, tooltip=tip, layout=w.Layout(width="200px"))
            button.add_class("cubeloupe-export-" + label.split()[0].lower())
            button.on_click(lambda _, action=action, label=label: self.write(action, label))
            self.buttons.append(button)
        self.status = StatusLine()
        super().__init__([w.HBox([self.name, self.overwrite], layout=w.Layout(flex_flow="row wrap")),
                          w.HBox(self.buttons, layout=w.Layout(flex_flow="row wrap")), self.status], **kwargs)

    def write(self, action, label):
        """Call ``action(stem, overwrite)`` and report the files it returns (or its error) in the status line."""
        with self.status.guard(f"writing {label}"):
            written = action(self.name.value.strip() or "cubeloupe", self.overwrite.value)
            written = written if isinstance(written, list) else [written]
            self.status.info("Written: " + ", ".join(str(p) for p in written))

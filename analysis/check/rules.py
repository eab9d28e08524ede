"""The rules of the delivery check in words, as the report states them beside each section.

One place for the texts, so that the report and the code that applies a rule
quote the same constants.

Examples
--------
>>> "robust scatter" in FLAG_RULE
True
"""

from .detections import FLAG_SIGMAS
from .identification import IDENTIFY_TOLERANCE
from .noise_map import (
    DEGREE_P_VALUE,
    MIN_BOX_PIXELS,
    NOISE_BOXES,
    NOISE_MAP_DEGREE,
    NOISE_VARIATION,
    NOISE_VARIATION_P_VALUE,
    PBCOR_EDGE_RISE,
)

__all__ = ["FLAG_RULE", "CONTINUUM_RULE", "SPATIAL_RULE", "lines_rule", "velocity_reference_text"]

FLAG_RULE = (
    "Channel rms: 1.4826 x the median absolute deviation over the channel's pixels (a regular grid of them), or, "
    "where that stands 3 standard errors above it (emission over the field lifts it), the rms from the "
    "differences with the neighbouring channels, corrected for their correlation; for images of fewer than 4096 "
    "independent pixels the running median over enough neighbouring channels. Flagged channels: both the plain "
    "and the difference-based rms differing from the median of their values over the band by more than "
    f"{FLAG_SIGMAS:g} times their robust scatter (1.4826 x MAD), or wholly blanked."
)
CONTINUUM_RULE = (
    "Leftover continuum: mean over the line-free channels in each pixel: all channels except flagged ones, each "
    "detection (emission, absorption or negative) padded on both sides by half its number of channels (its wings; a quarter where that leaves "
    "fewer than a tenth of the band line-free), "
    "and the features of the field's mean spectrum (emission spread over the field); significance = mean / (the "
    "pixel's standard deviation over those channels / sqrt(n)), widened by sqrt(1 + 2 sum_L rho_L) for the "
    "correlation rho of neighbouring channels (measured from the lag-1 and lag-2 channel differences), and given "
    "as the Gaussian sigma of equal tail probability under Student's t with n - 1 degrees of freedom."
)


def lines_rule(threshold, effective, false_alarms, per_pixel=False):
    if false_alarms is None:
        level = f"the threshold, {threshold:g} sigma as asked (no false-alarm control)"
    else:
        level = (
            f"the threshold, {effective:.2f} sigma: the larger of the {threshold:g} asked and the level above "
            f"which {false_alarms:g} pure-noise peaks or dips are expected over the whole cube, half on each side "
            f"(both signs are searched: twice the trials; expected Euler "
            f"characteristic of Gaussian noise correlated over the beam or the measured noise correlation, "
            f"whichever gives more independent beams, capped by the Bonferroni bound; Worsley et al. 1996, "
            f"Human Brain Mapping 4, 58)"
        )
    units = ("each pixel's values divided by its relative noise (the noise map), over the channel's rms at the "
             "quietest part of the field" if per_pixel else "over the channel's robust rms")
    return (
        f"Detections: peak-intensity spectrum (maximum over pixels per channel of the data minus each "
        f"pixel's median over channels, i.e. without continuum), {units}; absorption likewise from the "
        f"minimum over pixels (the trough spectrum), negated; runs of adjacent channels whose 3-channel "
        f"smoothed S/N is above the edge level "
        f"(median + 3 robust scatters of the channels below the threshold) or whose own S/N reaches "
        f"the threshold, gaps of one channel bridged, kept when the highest channel reaches {level}. "
        f"Identifications: catalog lines within half the feature "
        f"width + {IDENTIFY_TOLERANCE.to_value('km/s'):g} km/s at z."
    )


SPATIAL_RULE = (
    "Noise across the field: each pixel's noise from the differences of neighbouring channels, at the channel "
    f"subsample (1.4826 x median absolute difference / sqrt 2); the median of its log in boxes of about 1/"
    f"{NOISE_BOXES} of the field (at least {MIN_BOX_PIXELS} pixels and two beams); a 2-D Legendre polynomial "
    f"in log(noise) of degree up to {NOISE_MAP_DEGREE} through the boxes (weighted least squares, boxes beyond "
    f"4 robust scatters left out, the lowest degree no higher one beats at p = {DEGREE_P_VALUE:g}; the mesh of "
    "boxes as for the background maps of Bertin & Arnouts 1996, A&AS 117, 393), relative to its lowest value. "
    f"The noise varies when a flat field is rejected at p < {NOISE_VARIATION_P_VALUE:g} (F test) and the "
    f"noisiest pixel is at least {NOISE_VARIATION:.0%} above the quietest; it looks primary-beam corrected when "
    f"the median along the field's edge is at least {PBCOR_EDGE_RISE:g} times the quietest and 95 % of the edge "
    f"lies above {1 + (PBCOR_EDGE_RISE - 1) / 2:g}. Edge/centre: the median of the map along the edge (the "
    "outermost pixels with data) over the quietest part."
)


def velocity_reference_text(frame):
    """What the velocities of the report are relative to, in words."""
    frame = f"the cube's {frame} frame" if frame else "the cube's own frame (no SPECSYS in the header)"
    return (
        "Velocity offsets of identifications are radio-convention velocities, c (f_line - f) / f_line, of a "
        "detection relative to the catalog line redshifted to the identification's z (f_line = f_rest / (1 + z); "
        "the z given, solved, or that puts the line on the detection), i.e. in the rest frame of a source at "
        f"that z, with observed frequencies in {frame}. With z = 0 they are velocities in that frame itself: "
        "a nearby galaxy described by a systemic velocity v shows its lines near +v; give z = v / c for an "
        "optical-convention v (1 + z = 1 / (1 - v / c) for a radio-convention v) to have offsets from the "
        "systemic velocity. Widths in km/s are c df / f at the detection."
    )



"""Tests of the rules on spectra of the delivery check (analysis/check/detections.py; issue 8)."""


import numpy as np

from cubeloupe.analysis.check import FeatureChannels, flag_channels, group_features, line_free_channels





def test_flag_channels_finds_a_noisy_and_a_blank_channel(rng):
    rms = 1.0 + 0.01 * rng.normal(size=200)
    rms[17] = 1.5
    rms[120] = np.nan
    assert list(flag_channels(rms)) == [17, 120]


def test_flag_channels_flags_nothing_in_even_noise(rng):
    # per-channel rms of Gaussian noise scatter by about 1/sqrt(2N) (common practice)
    rms = 1.0 + rng.normal(scale=1 / np.sqrt(2 * 1024), size=500)
    assert flag_channels(rms).size == 0


def test_group_features_merges_one_channel_gaps_and_sorts_by_strength():
    snr = np.ones(60)
    snr[10:13] = [4, 7, 4]          # one feature
    snr[30:36] = [4, 6, 1.0, 5, 9, 4]  # a 1-channel dip inside one feature
    snr[50] = 4.5                   # below threshold: not a feature
    features = group_features(snr, threshold=5)
    # by hand: the floor is 1 with no scatter, so the edge is 1; the 3-channel means at 9 and 13
    # ((1 + 1 + 4) / 3 = 2) lie above it, those at 8 and 14 do not; likewise 29 and 36
    assert [(f.first, f.last, f.peak) for f in features] == [(29, 36, 34), (9, 13, 11)]


def test_group_features_breaks_runs_at_blanked_channels():
    snr = np.ones(20)
    snr[5:12] = 8.0
    snr[8] = np.nan
    # smoothing widens each run by one channel on its outer side, never across the blank channel
    assert [(f.first, f.last) for f in group_features(snr)] == [(4, 7), (9, 12)]


def test_group_features_keeps_a_broad_faint_line_in_one_piece(rng):
    snr = 3.0 + 0.4 * rng.normal(size=200)
    # a 15-channel line whose peak S/N wavers around the threshold
    snr[90:105] += np.array([1.0, 1.5, 2.0, 2.4, 1.2, 2.6, 0.8, 2.2, 1.0, 2.5, 1.1, 2.0, 1.5, 1.0, 0.8])
    snr[95] = 6.0
    features = group_features(snr)
    assert len(features) == 1
    assert features[0].first <= 91 and features[0].last >= 103


def test_group_features_threshold_is_inclusive():
    snr = np.ones(10)
    snr[4] = 5.0
    assert len(group_features(snr, threshold=5.0)) == 1
    assert group_features(snr, threshold=5.01) == []


def test_line_free_channels_pads_each_feature_by_a_quarter_of_its_width():
    wide = FeatureChannels(first=20, last=29, peak=25, peak_snr=9.0, edge_level=3.0)  # 10 channels: pad 3
    narrow = FeatureChannels(first=50, last=50, peak=50, peak_snr=6.0, edge_level=3.0)  # 1 channel: pad 2
    free = line_free_channels(60, [wide, narrow], flagged=[0])
    assert list(np.flatnonzero(~free)) == [0, *range(17, 33), *range(48, 53)]

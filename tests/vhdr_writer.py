"""The outside reference of the `.vhdr` reader tests: files written by pybv, a maintained general-purpose writer."""

import pybv


def write_with_pybv(folder, stem: str, data_volts, rate_hz: float, channels, **options) -> None:
    """Write ``data_volts`` (channels, samples) as ``<folder>/<stem>.vhdr`` (+ .vmrk, .eeg) with pybv.

    ``options`` (sample format, resolution, unit, events, overwrite) go to the writer as they are.
    """
    pybv.write_brainvision(
        data=data_volts, sfreq=rate_hz, ch_names=list(channels), fname_base=stem, folder_out=folder, **options
    )

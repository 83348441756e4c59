"""The epoched recording of one subject, as every input source delivers it."""

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Epochs:
    """Epoched EEG of one subject.

    Attributes
    ----------
    data : ndarray, shape (n_epochs, n_channels, n_samples)
        Samples in volts.
    sample_rate_hz : float
        Sampling rate in Hz.
    epoch_start_s : float
        Time of the first sample relative to the event, in s.
    channels : tuple of str
        Channel names, length n_channels.
    labels : ndarray of str, shape (n_epochs,)
        Event label of each epoch.
    rejected : dict
        Number of epochs rejected per event label before ``data`` (e.g. by a
        peak-to-peak criterion); empty when nothing was rejected.
    """

    data: np.ndarray
    sample_rate_hz: float
    epoch_start_s: float
    channels: tuple[str, ...]
    labels: np.ndarray
    rejected: dict[str, int] = field(default_factory=dict)

    @property
    def times(self) -> np.ndarray:
        """Sample times in s, shape (n_samples,)."""
        return self.epoch_start_s + np.arange(self.data.shape[-1]) / self.sample_rate_hz

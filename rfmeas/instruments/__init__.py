"""Take sweeps from SCPI instruments (LCR meters, VNAs) through pyvisa, with profiles as TOML."""

from rfmeas.instruments.acquisition import AcquisitionResult, Instrument, acquire
from rfmeas.instruments.profiles import Profile, available_profiles, load_profile, parse_profile
from rfmeas.instruments.session import InstrumentTimeout, Session, list_resources, open_session
from rfmeas.instruments.sweep import SweepPlan, parse_sweep
from rfmeas.instruments.touchstone_stream import TouchstoneStream

__all__ = [
    "AcquisitionResult", "Instrument", "InstrumentTimeout", "Profile", "Session", "SweepPlan",
    "TouchstoneStream", "acquire", "available_profiles", "list_resources", "load_profile",
    "open_session", "parse_profile", "parse_sweep",
]

"""Take sweeps from SCPI instruments (LCR meters, VNAs) through pyvisa, with profiles as TOML."""

from .acquisition import AcquisitionResult, Instrument, acquire
from .profiles import Profile, available_profiles, load_profile, parse_profile
from .session import InstrumentTimeout, Session, list_resources, open_session
from .sweep import SweepPlan, parse_sweep
from .touchstone_stream import TouchstoneStream, partial_path

__all__ = [
    "AcquisitionResult", "Instrument", "InstrumentTimeout", "Profile", "Session", "SweepPlan",
    "TouchstoneStream", "acquire", "available_profiles", "list_resources", "load_profile",
    "open_session", "parse_profile", "parse_sweep", "partial_path",
]
